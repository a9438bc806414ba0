//go:build !cgo || !duckdb

package verify

import (
	"context"
	"fmt"
)

// duckDBLinked says this build carries the DuckDB driver.
const duckDBLinked = false

// openDuckDB in a build without DuckDB: the driver links DuckDB's C++
// library (some 75 MB of the binary, see DEVELOPERS.md), so only builds
// with -tags duckdb and cgo carry it.
func openDuckDB(context.Context) (*sqlDB, error) {
	return nil, fmt.Errorf("%w: this build has no DuckDB (build with -tags duckdb and cgo to check it)", ErrSkip)
}
