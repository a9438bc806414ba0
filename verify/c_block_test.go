package verify

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// blockCases are golden cases the block layout writes (none falls back):
// NaN to both sides, two outputs averaged (a fully grown scikit-learn
// forest), float32 sums, softmax, a float32 model's midpoints, a trained
// regression.
var blockCases = []string{"edge-nan-routing", "sklearn-breast-cancer", "v2-accumulate32-sum",
	"edge-softmax", "edge-float32", "trained-regression", "v2-multi-output-regression"}

// TestCBlockLanes builds the block layout with and without -mavx2 (the
// walk has no AVX2 path of its own any more; what the compilers vectorise
// under -mavx2 must not change a bit) and requires every build to print the
// same bytes (score checks it) and those to be the interpreter's, in double
// and float, NAME_predict_batch being checked against NAME_predict by the
// driver. Cost: 7 cases x 2 variants x 3 builds, about 20 s of gcc/clang.
func TestCBlockLanes(t *testing.T) {
	testenv.Need(t, cTools(true))
	matrix := cpuMatrix(t, []cBuild{{"gcc", "c99", "O2", false}},
		cpuBuilds{"avx2", "AVX2", []cBuild{{"gcc", "c99", "O2 -mavx2", false}, {"clang", "c11", "O1 -mavx2", false}}})
	checkLayoutBuilds(t, ctarget.Block, blockCases, matrix)
}

// cpuBuilds are builds that need the CPU flag (as /proc/cpuinfo names it)
// to run.
type cpuBuilds struct {
	flag, name string
	builds     []cBuild
}

// cpuMatrix is base and the builds of extra whose CPU flag this machine
// has. A CPU feature is not something a machine's setup can install, so
// the builds it cannot run are left out, and the test says so, rather than
// failing under SAWMILL_REQUIRE_ENGINES: the base builds still run every
// case (on a machine without the feature the emitted code takes the
// portable path, which they check).
func cpuMatrix(t *testing.T, base []cBuild, extra ...cpuBuilds) []cBuild {
	matrix := slices.Clone(base)
	for _, e := range extra {
		if err := hasCPUFlag(e.flag, e.name); err != nil {
			t.Logf("%d builds with %s left out: %v", len(e.builds), e.name, err)
			continue
		}
		matrix = append(matrix, e.builds...)
	}
	return matrix
}

// checkLayoutBuilds scores the named golden cases in layout, which each
// must be written in (none falls back), double and float, with every
// build of matrix, and requires the interpreter's outputs.
func checkLayoutBuilds(t *testing.T, layout string, names []string, matrix []cBuild) {
	cases, err := goldencase.Cases(filepath.Join("..", "golden", "testdata"))
	require.NoError(t, err)
	byName := map[string]*goldencase.Case{}
	for _, c := range cases {
		byName[c.Name] = c
	}
	r := testCRunner()
	for _, name := range names {
		c := byName[name]
		require.NotNil(t, c, name)
		for _, variant := range r.Variants() {
			t.Run(name+"/"+variant, func(t *testing.T) {
				t.Parallel()
				p, _, err := compile.Compile(c.Model, r.CompileOptions(variant))
				require.NoError(t, err)
				if variant == "float" && ctarget.FitsFloat(p) != nil {
					t.Skip("float C declines this model (its error bound); the double run covers it")
				}
				o := r.options(layout, variant)
				got, why, err := ctarget.Resolve(p, o)
				require.NoError(t, err)
				require.Equal(t, layout, got, why)
				res, err := r.score(context.Background(), p, o, c.Rows, t.TempDir(), matrix, false)
				require.NoError(t, err)
				want, wantCls := c.ReferenceFor(r, variant)
				exact, bound := r.Tolerance(variant, p)
				m := Compare(want, res.Outputs, wantCls, res.Classes, c.Model.NumOutputs(), exact, bound)
				require.True(t, m.OK(), "%s", m)
			})
		}
	}
}

// hasCPUFlag says why this machine lacks the x86-64 feature whose
// /proc/cpuinfo flag is flag (what, for the message), or nil.
func hasCPUFlag(flag, what string) error {
	if runtime.GOARCH != "amd64" {
		return fmt.Errorf("not an x86-64 machine (%s)", runtime.GOARCH)
	}
	b, err := os.ReadFile("/proc/cpuinfo")
	if err != nil {
		return err
	}
	if !strings.Contains(string(b), " "+flag+" ") && !strings.Contains(string(b), " "+flag+"\n") {
		return fmt.Errorf("the CPU has no %s (/proc/cpuinfo)", what)
	}
	return nil
}
