//go:build cgo && duckdb

package verify

import (
	"context"
	dbsql "database/sql"
	"database/sql/driver"

	"github.com/duckdb/duckdb-go/v2" // database/sql driver "duckdb"; cgo, bundles the library
)

// duckDBLinked says this build carries the DuckDB driver.
const duckDBLinked = true

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
	return &sqlDB{conn: conn, param: func(int) string { return "?" }, colType: "DOUBLE", nanTwins: true,
		close:      func() { conn.Close(); db.Close() },
		appendRows: duckAppend(conn)}, nil
}

// duckAppend loads rows through DuckDB's appender: INSERT with bound
// parameters manages about 1,500 rows/s of 31 columns, the appender well
// over 100,000.
func duckAppend(conn *dbsql.Conn) func(context.Context, string, string, func(func(...any) error) error) error {
	return func(ctx context.Context, schema, table string, rows func(func(...any) error) error) error {
		return conn.Raw(func(dc any) error {
			a, err := duckdb.NewAppenderFromConn(dc.(driver.Conn), schema, table)
			if err != nil {
				return err
			}
			vals := []driver.Value{}
			err = rows(func(v ...any) error {
				vals = vals[:0]
				for _, x := range v {
					vals = append(vals, x)
				}
				return a.AppendRow(vals...)
			})
			if cerr := a.Close(); err == nil {
				err = cerr
			}
			return err
		})
	}
}
