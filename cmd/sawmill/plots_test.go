package main

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestTrainPlots(t *testing.T) {
	dir := t.TempDir()
	plots := filepath.Join(dir, "charts")
	code, out, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id",
		"--trees", "20", "-o", filepath.Join(dir, "m.json"), "--plots", plots)
	require.Equal(t, 0, code, errs)
	for _, name := range []string{"oob-error.svg", "importance.svg"} {
		b, err := os.ReadFile(filepath.Join(plots, name))
		require.NoError(t, err)
		require.Contains(t, string(b), "<svg")
		require.Contains(t, out, "wrote "+filepath.Join(plots, name))
	}

	plots = filepath.Join(dir, "curve-only")
	code, out, errs = sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id",
		"--trees", "5", "--importance=false", "-o", filepath.Join(dir, "m2.json"), "--plots", plots)
	require.Equal(t, 0, code, errs)
	require.FileExists(t, filepath.Join(plots, "oob-error.svg"))
	require.NoFileExists(t, filepath.Join(plots, "importance.svg"))
	require.Contains(t, out, "no importance chart")
}
