package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/source"
)

const xgbFixture = "../../source/testdata/xgboost/x3_multi_softprob/model.ubj"

// `sawmill import` writes what source.Load reads, refuses to overwrite, and
// passes its options to the importer.
func TestImportXGBoost(t *testing.T) {
	out := filepath.Join(t.TempDir(), "wine.json")
	code, stdout, errs := sawmill(t, "import", xgbFixture, "-o", out, "--iterations", "2", "--missing", "-999")
	require.Equal(t, 0, code, errs)
	require.Contains(t, stdout, "(xgboost-ubjson): 6 trees, 13 features, 3 outputs")
	require.Contains(t, stdout, "kept the first 2 of 4 rounds (--iterations)")

	got, err := forest.ReadFile(out)
	require.NoError(t, err)
	want, err := source.Load(xgbFixture, "", source.Options{Iterations: 2, Missing: ptr(-999.0)})
	require.NoError(t, err)
	require.Equal(t, want.Forest.Trees, got.Trees)
	require.Equal(t, want.Forest.BaseScore, got.BaseScore)
	require.True(t, got.HasMissingValue)
	require.Equal(t, 2, got.Version())

	before, err := os.ReadFile(out)
	require.NoError(t, err)
	code, _, errs = sawmill(t, "import", xgbFixture, "-o", out)
	require.Equal(t, 1, code)
	require.Contains(t, errs, "wine.json: exists; not overwriting it\nhint:")
	after, err := os.ReadFile(out)
	require.NoError(t, err)
	require.Equal(t, before, after)

	code, _, errs = sawmill(t, "import", xgbFixture, "-o", out, "--missing", "lots")
	require.Equal(t, 2, code)
	require.Contains(t, errs, `--missing "lots" is not a number`)

	code, _, errs = sawmill(t, "import", xgbFixture, "-o", out, "--force", "--from", "sawmill")
	require.Equal(t, 1, code)
	require.NotEmpty(t, strings.TrimSpace(errs))
}

// inspect reads an XGBoost file directly and says how it was read.
func TestInspectXGBoost(t *testing.T) {
	code, out, errs := sawmill(t, "inspect", "../../source/testdata/xgboost/x17_categorical/model.json")
	require.Equal(t, 0, code, errs)
	require.Contains(t, out, "source format      xgboost-json")
	require.Contains(t, out, "categorical splits: XGBoost sends the listed categories right")
}

func ptr[T any](v T) *T { return &v }
