package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

const breastCancer = "../../golden/testdata/sklearn-breast-cancer/model.json"

// budgetRows measures the Breast Cancer fixture's layouts as compile does.
func budgetRows(t *testing.T) map[string]verify.BudgetRow {
	if _, err := exec.LookPath(verify.ARMCompiler); err != nil && os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
		t.Fatalf("%s is not on PATH, and SAWMILL_REQUIRE_ENGINES is set", verify.ARMCompiler)
	}
	_, rows, err := verify.FitBudget(context.Background(), mustProgram(t), ctarget.Options{}, verify.Budget{Flash: 1 << 30})
	require.NoError(t, err)
	out := map[string]verify.BudgetRow{}
	for _, r := range rows {
		out[r.Name()] = r
	}
	for _, l := range []string{"nested", "table", "binned", "bitvector", "table --pack", "binned --pack"} {
		require.Contains(t, out, l, "every C layout is measured (the fixture's trees have at most 64 leaves, so bitvector too), table and binned packed too")
	}
	sizes, err := ctarget.Sizes(mustProgram(t), ctarget.Options{})
	require.NoError(t, err)
	require.Len(t, out, len(sizes)+2, "every layout Sizes gives (perfect falls back on this fixture), and table and binned packed")
	return out
}

// smallestRow is the row of least flash.
func smallestRow(rows map[string]verify.BudgetRow) verify.BudgetRow {
	var best verify.BudgetRow
	for _, r := range rows {
		if best.Layout == "" || r.Flash < best.Flash {
			best = r
		}
	}
	return best
}

// A flash budget picks the smallest layout that fits, at the byte: the
// smallest row's own flash fits, one byte less fails naming by how much
// every layout misses, and writes nothing. Packed layouts are rows too.
func TestCompileFlashBudget(t *testing.T) {
	rows := budgetRows(t)
	bin := smallestRow(rows)
	require.Equal(t, "binned", bin.Layout, "the fixture's binned build is the smallest")
	require.Less(t, bin.Flash, rows["table"].Flash)
	dir := t.TempDir()
	code, out, errOut := sawmill(t, "compile", breastCancer, "--target", "c", "-o", dir, "--flash-budget", fmt.Sprint(bin.Flash))
	require.Equal(t, 0, code, errOut)
	require.Contains(t, out, bin.Name()+" ")
	require.Contains(t, out, "<- chosen")
	src, err := os.ReadFile(filepath.Join(dir, "model.c"))
	require.NoError(t, err)
	require.Contains(t, string(src), "layout binned")
	require.Equal(t, bin.Pack, strings.Contains(string(src), "model_field("), "packed exactly when the packed row is chosen")

	// table only: the budget holds the table layout, not nested
	code, _, errOut = sawmill(t, "compile", breastCancer, "--target", "c", "-o", dir, "--flash-budget", fmt.Sprint(rows["table"].Flash), "--layout", "table")
	require.Equal(t, 0, code, errOut)

	empty := t.TempDir()
	code, _, errOut = sawmill(t, "compile", breastCancer, "--target", "c", "-o", empty, "--flash-budget", fmt.Sprint(bin.Flash-1))
	require.Equal(t, 1, code)
	require.Contains(t, errOut, "no exact C layout fits the budget")
	require.Contains(t, errOut, fmt.Sprintf("%s misses flash by 1 bytes (%d of %d", bin.Name(), bin.Flash, bin.Flash-1))
	require.Contains(t, errOut, fmt.Sprintf("table misses flash by %d bytes", rows["table"].Flash-bin.Flash+1))
	require.Contains(t, errOut, "nested misses flash by")
	files, _ := os.ReadDir(empty)
	require.Empty(t, files, "a budget missed writes nothing")
}

// A RAM budget reads the stack gcc reports: the binned build's own RAM
// fits, one byte less fails; without arm-none-eabi-gcc it is refused.
func TestCompileRAMBudget(t *testing.T) {
	if _, err := exec.LookPath(verify.ARMCompiler); err != nil {
		code, _, errOut := sawmill(t, "compile", breastCancer, "--target", "c", "-o", t.TempDir(), "--ram-budget", "4096")
		require.Equal(t, 1, code)
		require.Contains(t, errOut, verify.ErrRAMUnmeasured.Error())
		if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
			t.Fatalf("%s is not on PATH, and SAWMILL_REQUIRE_ENGINES is set", verify.ARMCompiler)
		}
		t.Skipf("%s is not on PATH: the refusal is checked, no RAM measured", verify.ARMCompiler)
	}
	rows := budgetRows(t)
	bin := rows["binned"]
	require.Positive(t, bin.RAM, "the stack of a prediction is measured")
	code, _, errOut := sawmill(t, "compile", breastCancer, "--target", "c", "-o", t.TempDir(), "--ram-budget", fmt.Sprint(bin.RAM), "--layout", "binned")
	require.Equal(t, 0, code, errOut)
	code, _, errOut = sawmill(t, "compile", breastCancer, "--target", "c", "-o", t.TempDir(), "--ram-budget", fmt.Sprint(bin.RAM-1), "--layout", "binned")
	require.Equal(t, 1, code)
	require.Contains(t, errOut, fmt.Sprintf("binned misses RAM by 1 bytes (%d of %d)", bin.RAM, bin.RAM-1))
	var be *verify.BudgetError
	_, _, err := verify.FitBudget(context.Background(), mustProgram(t), ctarget.Options{Layout: "binned"}, verify.Budget{RAM: bin.RAM - 1})
	require.True(t, errors.As(err, &be), "%v", err)
}

// mustProgram compiles the Breast Cancer fixture for double C.
func mustProgram(t *testing.T) *compile.Program {
	f, err := forest.ReadFile(breastCancer)
	require.NoError(t, err)
	p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(false))
	require.NoError(t, err)
	return p
}

// Budgets serve C only.
func TestBudgetNotForGo(t *testing.T) {
	code, _, errOut := sawmill(t, "compile", breastCancer, "--target", "go", "-o", t.TempDir(), "--flash-budget", "5000")
	require.Equal(t, 2, code)
	require.Contains(t, errOut, "--flash-budget (c only)")
}

// --layout batch writes the fastest batch walk the model takes (block for
// the fully grown forest, which no perfect tree pads) and says why; it is
// refused beside a flash budget, which is for boards.
func TestCompileBatchLayout(t *testing.T) {
	dir := t.TempDir()
	code, out, errOut := sawmill(t, "compile", breastCancer, "--target", "c", "--layout", "batch", "--name", "bc", "-o", dir)
	require.Equal(t, 0, code, errOut)
	h, err := os.ReadFile(filepath.Join(dir, "bc.h"))
	require.NoError(t, err)
	require.Contains(t, string(h), "layout block", out)
	require.Contains(t, string(h), "batch asked for; not perfect")
	code, _, errOut = sawmill(t, "compile", breastCancer, "--target", "c", "--layout", "batch", "-o", t.TempDir(), "--flash-budget", "50000")
	require.Equal(t, 2, code)
	require.Contains(t, errOut, "--layout batch is for desktops and servers")
}

// --int-features floors the named features' thresholds and says how many;
// an unknown name is an error naming it.
func TestCompileIntFeatures(t *testing.T) {
	dir := t.TempDir()
	code, out, errOut := sawmill(t, "compile", breastCancer, "--target", "c", "--layout", "binned", "-o", dir, "--int-features", "mean_radius,mean_texture")
	require.Equal(t, 0, code, errOut)
	require.Regexp(t, `integer features mean_radius, mean_texture: [1-9]\d* thresholds floored`, out)
	code, _, errOut = sawmill(t, "compile", breastCancer, "--target", "c", "-o", t.TempDir(), "--int-features", "nope")
	require.Equal(t, 1, code)
	require.Contains(t, errOut, `integer feature "nope" is not one of the model's 30 features`)
}
