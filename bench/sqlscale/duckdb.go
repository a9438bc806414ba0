//go:build cgo && duckdb

package main

import _ "github.com/duckdb/duckdb-go/v2" // database/sql driver "duckdb"

// duckDBLinked says this build carries the DuckDB driver.
const duckDBLinked = true
