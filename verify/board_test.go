package verify

import (
	"context"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// TestBoardCatchesPlantedFaults plants a wrong threshold and a wrong leaf
// into the program the board runner emits, runs it on every board, and
// expects Verify to name the row that shows it: the QEMU runs compare
// outputs, they do not only exit 0. One layout (table, whose packed words
// an ARMv6-M core must read with aligned loads) keeps the cost to ten
// cross builds and emulator runs, about 10 s.
func TestBoardCatchesPlantedFaults(t *testing.T) {
	if testing.Short() {
		t.Skip("board runs: without -short")
	}
	f := verifyWine(t)
	rows := verifyProbeRows(f)
	r := boardRunner{Werror: true}
	for _, variant := range r.Variants() {
		for _, fl := range plantedFaults {
			t.Run(variant+"/"+fl.name, func(t *testing.T) {
				b := findBoard(variant)
				if err := boardTools(b); err != nil {
					testenv.Need(t, err)
				}
				base, _, err := compile.Compile(f, r.CompileOptions(variant))
				require.NoError(t, err)
				exact, bound := r.Tolerance(variant, base)
				node, wantRow := plantFirstVisible(t, f, r.CompileOptions(variant), fl, rows, exact, bound, b.float)
				require.GreaterOrEqual(t, node, 0, "no node of tree 0 where the fault shows")
				rep, err := Verify(context.Background(), f, nil, VerifyOptions{
					Runners: []Runner{r}, Targets: []string{r.Name()},
					Layouts: []string{"table"}, Variants: []string{variant},
					Tamper:  func(_, _, _ string, p *compile.Program) { fl.plant(p, node) },
					TempDir: t.TempDir(),
				})
				require.NoError(t, err)
				require.Len(t, rep.Checks, 1)
				c := rep.Checks[0]
				require.Equal(t, Differ, c.Status, c.Reason)
				require.NotNil(t, c.First)
				require.Equal(t, wantRow, c.First.Index)
			})
		}
	}
}
