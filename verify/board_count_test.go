package verify

import (
	"context"
	"errors"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// TestCountInstructions counts instructions per prediction on the
// Cortex-M4 and the Cortex-M0 for trained-wine's first 16 rows in both
// layouts. What must hold whatever the compiler does: every prediction
// executes at least one instruction a split tested on its path (the row
// reaching no split would still return), the worst is at least the mean,
// and the M0, which calls libgcc for every double comparison, needs more
// than the M4 (whose FPU has no double either, so both call libgcc: the
// M0's calls are longer). About 10 s.
func TestCountInstructions(t *testing.T) {
	if testing.Short() {
		t.Skip("instruction counts under QEMU: without -short")
	}
	f, err := forest.ReadFile(filepath.Join(goldenCases, "trained-wine", "model.json"))
	require.NoError(t, err)
	rows, err := forest.ReadRowsFile(filepath.Join(goldenCases, "trained-wine", "rows.csv"), f.Features, forest.RowOptions{})
	require.NoError(t, err)
	rows.Values = rows.Values[:16*len(f.Features)]
	rows.Line = rows.Line[:16]
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	for _, layout := range []string{"nested", "table"} {
		per := map[string]*Instructions{}
		for _, board := range []string{"m4", "m0"} {
			in, err := CountInstructions(context.Background(), p, layout, board, rows)
			if errors.Is(err, ErrSkip) {
				testenv.Need(t, err)
			}
			require.NoError(t, err)
			t.Logf("%s %s: %d rows, worst %d, mean %.1f instructions per prediction", layout, board, in.Rows, in.Worst, in.Mean)
			require.Equal(t, 16, in.Rows)
			require.GreaterOrEqual(t, float64(in.Worst), in.Mean)
			require.Greater(t, in.Mean, float64(len(p.Trees)))
			per[board] = in
		}
		require.Greater(t, per["m0"].Mean, per["m4"].Mean, layout)
	}
}
