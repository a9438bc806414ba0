//go:build !(cgo && duckdb)

package main

// duckDBLinked says this build carries the DuckDB driver: not without
// -tags duckdb.
const duckDBLinked = false
