package verify

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// intLeafGolden are golden cases the integer-leaf builds are verified on:
// votes averaged, a logistic sum, softmax, a regression average.
var intLeafGolden = []string{"sklearn-breast-cancer", "edge-logistic", "edge-softmax", "trained-regression", "v2-output-trees-softmax"}

// intLeafRows reads a golden case's model and rows.
func intLeafRows(t *testing.T, name string) (*forest.Forest, *forest.Rows) {
	t.Helper()
	f, err := forest.ReadFile(filepath.Join(goldenCases, name, "model.json"))
	require.NoError(t, err)
	rows, err := forest.ReadRowsFile(filepath.Join(goldenCases, name, "rows.csv"), f.Features, forest.RowOptions{})
	require.NoError(t, err)
	return f, rows
}

// intLeafVerify verifies f's integer-leaf C build in one layout and
// variant, on the golden rows and the probes.
func intLeafVerify(t *testing.T, f *forest.Forest, rows *forest.Rows, r Runner, layout, variant string, tamper func(string, string, string, *compile.Program)) *Check {
	t.Helper()
	rep, err := Verify(context.Background(), f, rows, VerifyOptions{
		Runners: []Runner{r}, Targets: []string{r.Name()}, Layouts: []string{layout}, Variants: []string{variant},
		Probes: true, Tamper: tamper, TempDir: t.TempDir(),
	})
	require.NoError(t, err)
	require.Len(t, rep.Checks, 1)
	return rep.Checks[0]
}

func requireC(t *testing.T) {
	t.Helper()
	testenv.Need(t, cTools(testConfig.AllCompilers))
}

// Integer-leaf C (int16 leaves binned in double and float, int32 leaves in
// the table layout) agrees with the interpreter within the derived bound on
// every golden row and probe, not bit for bit, with every label that the
// bound decides. Cost: 15 checks of two C builds each, about 30 s.
func TestCIntLeavesGolden(t *testing.T) {
	requireC(t)
	for _, name := range intLeafGolden {
		f, rows := intLeafRows(t, name)
		for _, c := range []struct {
			bits            int
			layout, variant string
		}{{16, emit.Binned, "double"}, {16, emit.Binned, "float"}, {32, emit.Table, "double"}} {
			r := cRunner{Werror: true, cEmit: cEmit{IntLeaves: c.bits}}
			ch := intLeafVerify(t, f, rows, r, c.layout, c.variant, nil)
			t.Logf("%s int%d %s %s: %s, %d rows, max |diff| %.3g, bound %.3g, %d rows where the label is open, %d differ",
				name, c.bits, c.layout, c.variant, ch.Status, ch.Rows, float64(ch.MaxAbsDiff), float64(ch.Bound), ch.OpenLabels, ch.LabelMismatches)
			require.Equal(t, Agree, ch.Status, "%s int%d %s %s: %s", name, c.bits, c.layout, c.variant, ch.Reason)
			require.False(t, ch.Exact)
			require.LessOrEqual(t, float64(ch.MaxAbsDiff), float64(ch.Bound))
		}
	}
}

// A leaf planted wrong (tree 0's leaves doubled and moved by a unit) and a
// wrong scale (the division by 2^shift replaced by 2^(shift-1)) are both
// caught: the bound is no licence for any difference.
func TestCIntLeavesPlanted(t *testing.T) {
	requireC(t)
	for _, name := range []string{"edge-logistic", "trained-regression"} {
		f, rows := intLeafRows(t, name)
		r := cRunner{Werror: true, cEmit: cEmit{IntLeaves: 16}}
		ch := intLeafVerify(t, f, rows, r, emit.Binned, "double", func(_, _, _ string, p *compile.Program) {
			for i := range p.Trees[0].Nodes {
				for j := range p.Trees[0].Nodes[i].Value {
					p.Trees[0].Nodes[i].Value[j] = 2*p.Trees[0].Nodes[i].Value[j] + 1
				}
			}
		})
		require.Equal(t, Differ, ch.Status, "%s: a wrong leaf: %s", name, ch.Reason)

		p, _, err := compile.Compile(f, r.CompileOptions("double"))
		require.NoError(t, err)
		_, scale, err := ctarget.IntLeafBounds(p, r.options(emit.Binned, "double"))
		require.NoError(t, err)
		t.Cleanup(func() { cEdit = nil })
		cEdit = func(file string, data []byte) []byte {
			if file != cName+".c" {
				return data
			}
			old := []byte(fmt.Sprintf("/ %s", cLit(scale)))
			require.True(t, bytes.Contains(data, old), "%s: no division by %s", file, old)
			return bytes.Replace(data, old, []byte(fmt.Sprintf("/ %s", cLit(scale/2))), 1)
		}
		ch = intLeafVerify(t, f, rows, r, emit.Binned, "double", nil)
		cEdit = nil
		require.Equal(t, Differ, ch.Status, "%s: a wrong scale: %s", name, ch.Reason)
	}
}

// cLit is a power of two as ctarget writes it in double C.
func cLit(v float64) string {
	s := strconv.FormatFloat(v, 'g', -1, 64)
	if !strings.ContainsAny(s, ".e") {
		s += ".0"
	}
	return s
}

// On an ARMv6-M core, integer leaves in the binned layout give a label path
// with no floating point at all: NAME_predict_class, NAME_predict_scaled
// and the mapping to bins call no soft-float routine, for a threshold on a
// logistic sum and an argmax of averaged votes. NAME_predict, which turns
// the sums into doubles, does call some, so the check can see them.
func TestCIntLeavesNoSoftFloatLabel(t *testing.T) {
	for _, name := range []string{"edge-logistic", "sklearn-breast-cancer"} {
		f, err := forest.ReadFile(filepath.Join(goldenCases, name, "model.json"))
		require.NoError(t, err)
		p, _, err := compile.Compile(f, compile.Options{})
		require.NoError(t, err)
		calls, err := FloatCalls(context.Background(), p, ctarget.Options{Name: cName, Layout: emit.Binned, IntLeaves: 16})
		if errors.Is(err, ErrNoARM) {
			testenv.Need(t, errors.New("arm-none-eabi-gcc is not on PATH (Debian package gcc-arm-none-eabi)"))
		}
		require.NoError(t, err)
		t.Logf("%s: %v", name, calls)
		for _, fn := range []string{"_predict_class", "_predict_scaled", "_bins", "_key", "_is_nan", "_bits", "_round32", "_key32"} {
			require.Empty(t, calls[cName+fn], "%s: %s%s calls floating-point routines", name, cName, fn)
		}
		require.NotEmpty(t, calls[cName+"_predict"], "%s: %s_predict turns sums into doubles: the check must see it", name, cName)
	}
}

// Under QEMU on the Cortex-M0 and the RV32 core (binned, no FPU) and the
// Cortex-M4 (table) with integer leaves, the golden rows score within the
// bound. Cost: a cross build and an emulator run per board and case, about
// 10 s.
func TestBoardIntLeaves(t *testing.T) {
	if testing.Short() {
		t.Skip("board runs: without -short")
	}
	for _, variant := range []string{"m0", "rv32", "m4"} {
		testenv.Need(t, boardTools(findBoard(variant)))
		r := boardRunner{Werror: true, Quick: true, cEmit: cEmit{IntLeaves: 16}}
		for _, name := range []string{"edge-logistic", "sklearn-breast-cancer"} {
			f, rows := intLeafRows(t, name)
			ch := intLeafVerify(t, f, rows, r, r.LayoutsFor(variant)[0], variant, nil)
			t.Logf("%s %s %s: %s, max |diff| %.3g, bound %.3g, %d open labels", variant, name, ch.Layout, ch.Status, float64(ch.MaxAbsDiff), float64(ch.Bound), ch.OpenLabels)
			require.Equal(t, Agree, ch.Status, "%s %s: %s", variant, name, ch.Reason)
		}
	}
}
