//go:build !cgo

package verify

import (
	"context"
	"fmt"
)

func openDuckDB(context.Context) (*sqlDB, error) {
	return nil, fmt.Errorf("%w: the DuckDB driver needs cgo, and this test binary was built with CGO_ENABLED=0", ErrSkip)
}
