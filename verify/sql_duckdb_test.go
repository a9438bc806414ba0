package verify

import (
	"context"
	"errors"
	"os"
	"strings"
	"testing"
)

// TestDuckDBLinked holds the build tag to its word: a build with
// -tags duckdb (and cgo) opens DuckDB, one without says how to get it, and
// CI (SAWMILL_REQUIRE_ENGINES) must be the former, or its DuckDB checks
// would all be skips.
func TestDuckDBLinked(t *testing.T) {
	db, err := openDuckDB(context.Background())
	if !duckDBLinked {
		if err == nil || !errors.Is(err, ErrSkip) || !strings.Contains(err.Error(), "-tags duckdb") {
			t.Fatalf("without DuckDB: got %v, want a skip naming -tags duckdb", err)
		}
		if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
			t.Fatal("SAWMILL_REQUIRE_ENGINES is set but this test binary has no DuckDB: run go test -tags duckdb")
		}
		return
	}
	if err != nil {
		t.Fatalf("with -tags duckdb: %v", err)
	}
	db.close()
}
