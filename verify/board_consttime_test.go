package verify

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
)

// ctCountCases are the golden models the constant-time count runs on: a
// regression forest, scikit-learn's Breast Cancer forest (a float32 model,
// whose double build rounds inputs on their bits), NaN inputs routed both
// ways, a float32 model with a missing value, and a logistic transform
// (its sign chosen by a mask, exp in the C library), each on its first
// ctCountRows rows.
var ctCountCases = []string{"trained-regression", "sklearn-breast-cancer", "edge-nan-routing", "v2-missing-value-999-float32", "edge-logistic"}

// ctCountRows is how many golden rows each count runs (QEMU's execution
// log grows with every instruction).
const ctCountRows = 12

// countRows reads a golden case's model and its first n rows.
func countRows(t *testing.T, name string, n int) (*forest.Forest, *forest.Rows) {
	f, err := forest.ReadFile(filepath.Join(goldenCases, name, "model.json"))
	require.NoError(t, err)
	rows, err := forest.ReadRowsFile(filepath.Join(goldenCases, name, "rows.csv"), f.Features, forest.RowOptions{})
	require.NoError(t, err)
	n = min(n, rows.Len())
	rows.Values = rows.Values[:n*len(f.Features)]
	rows.Line = rows.Line[:n]
	return f, rows
}

// TestCountConstantTime is the proof by measurement: under QEMU, every
// probe row's prediction executes the same number of the emitted code's
// own instructions (least == worst) in constant time, on the Cortex-M4
// (double and float builds), the Cortex-M0 and RV32, while the ordinary
// binned layout's count varies on the same rows (so the check can fail).
// On the float Cortex-M4 build, whose leaf sums are FPU instructions, the
// whole prediction is constant, the C library included; with soft-float
// sums (double builds, and every build on M0 and RV32) libgcc's addition
// takes a data-dependent time, which the test logs. About 60 s.
func TestCountConstantTime(t *testing.T) {
	if testing.Short() {
		t.Skip("instruction counts under QEMU: without -short")
	}
	for _, name := range ctCountCases {
		f, rows := countRows(t, name, ctCountRows)
		for _, board := range []string{"m4", "m4-float", "m0", "rv32"} {
			r := boardRunner{}
			p, _, err := compile.Compile(f, r.CompileOptions(board))
			require.NoError(t, err)
			plain, err := countInstructions(context.Background(), p, r.options(emit.Binned, board), board, rows)
			if errors.Is(err, ErrSkip) {
				if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
					t.Fatalf("%v, and SAWMILL_REQUIRE_ENGINES is set", err)
				}
				t.Skipf("skipped: %v", err)
			}
			require.NoError(t, err)
			r.ConstantTime = true
			ct, err := countInstructions(context.Background(), p, r.options(emit.Binned, board), board, rows)
			require.NoError(t, err)
			t.Logf("%s %s binned: own %d..%d (mean %.1f), all %d..%d (mean %.1f)", name, board,
				plain.Own.Least, plain.Own.Worst, plain.Own.Mean, plain.Least, plain.Worst, plain.Mean)
			t.Logf("%s %s constant time: own %d..%d (mean %.1f), all %d..%d (mean %.1f)", name, board,
				ct.Own.Least, ct.Own.Worst, ct.Own.Mean, ct.Least, ct.Worst, ct.Mean)
			require.Equal(t, ctCountRows, ct.Rows)
			require.Positive(t, ct.Own.Least)
			require.Equal(t, ct.Own.Least, ct.Own.Worst, "%s %s: the emitted code's instructions vary in constant time", name, board)
			require.Less(t, plain.Own.Least, plain.Own.Worst, "%s %s: the ordinary walk should vary on these rows", name, board)
			if board == "m4-float" && p.Transform == forest.NoTransform {
				require.Equal(t, ct.Least, ct.Worst, "%s: with FPU sums the whole prediction is constant", name)
			}
		}
	}
}

// TestBoardConstantTime runs the constant-time C of a few golden cases on
// the bare-metal boards (the Cortex-M4 double and float, the Cortex-M0 and
// RV32) and compares every golden row bit for bit with the interpreter
// (within the exp bound where a transform calls the C library's exp), with
// the self-test linked in as the board runner always does. About 30 s.
func TestBoardConstantTime(t *testing.T) {
	if testing.Short() {
		t.Skip("board runs: without -short")
	}
	r := boardRunner{Werror: true, cEmit: cEmit{ConstantTime: true}}
	for _, name := range append([]string{"edge-logistic", "sklearn-wine", "v2-transform-scale"}, ctCountCases...) {
		c, err := goldencase.LoadCase(filepath.Join(goldenCases, name), name)
		require.NoError(t, err)
		for _, board := range []string{"m4", "m4-float", "m0", "rv32"} {
			t.Run(name+"/"+board, func(t *testing.T) {
				if err := boardTools(findBoard(board)); err != nil {
					if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
						t.Fatalf("%v, and SAWMILL_REQUIRE_ENGINES is set", err)
					}
					t.Skipf("skipped: %v", err)
				}
				p, _, err := compile.Compile(c.Model, r.CompileOptions(board))
				require.NoError(t, err)
				res, err := r.Score(context.Background(), p, emit.Binned, board, c.Rows, t.TempDir())
				if findBoard(board).float && errors.Is(err, ErrDeclined) {
					t.Skipf("float C declines: %v", err)
				}
				require.NoError(t, err)
				want, wantCls := c.ReferenceFor(r, board)
				exact, bound := r.Tolerance(board, p)
				m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound)
				require.True(t, m.OK(), "%s", m)
			})
		}
	}
}
