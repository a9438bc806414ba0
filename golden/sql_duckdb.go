//go:build cgo

package golden

import (
	"context"
	dbsql "database/sql"

	_ "github.com/duckdb/duckdb-go/v2" // database/sql driver "duckdb"; cgo, bundles the library
)

func openDuckDB(ctx context.Context) (*sqlDB, error) {
	db, err := dbsql.Open("duckdb", "") // a fresh in-memory database
	if err != nil {
		return nil, err
	}
	db.SetMaxOpenConns(1)
	conn, err := db.Conn(ctx)
	if err != nil {
		db.Close()
		return nil, err
	}
	return &sqlDB{conn: conn, param: func(int) string { return "?" }, colType: "DOUBLE",
		close: func() { conn.Close(); db.Close() }}, nil
}
