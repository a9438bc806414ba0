package verify

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// perfectCases are golden cases the perfect layout writes (none falls
// back): NaN to both sides, float32 sums, softmax, several outputs, a
// float32 model's midpoints, votes. (diff-sqlite-1000-classes, 1,000
// outputs, ran past ten minutes under this matrix; the golden suite builds
// it with gcc -O2.)
var perfectCases = []string{"edge-nan-routing", "v2-accumulate32-sum", "edge-softmax",
	"v2-multi-output-regression", "edge-float32", "edge-vote"}

// TestCPerfectBuilds builds the perfect layout with gcc -O2 and -O3 and
// clang -O2 under the address and undefined-behaviour sanitizers (an index
// past a perfect tree's arrays would show there) and requires every build
// to print the same bytes and those to be the interpreter's, in double and
// float; the driver checks NAME_predict_batch (blocks of 16, a part block,
// rows one by one) against NAME_predict. Cost: 6 cases x 2 variants x 3
// builds, about 90 s of gcc/clang on 2 shared cores.
func TestCPerfectBuilds(t *testing.T) {
	testenv.Need(t, cTools(true))
	matrix := []cBuild{{"gcc", "c99", "O2", false}, {"gcc", "c11", "O3", false}, {"clang", "c11", "O2", true}}
	checkLayoutBuilds(t, ctarget.Perfect, perfectCases, matrix)
}

// TestCPerfectWalks builds the perfect layout with gcc without target
// flags (the step's inline assembly), with -march=x86-64-v4 in gcc and
// clang where the CPU runs it (cpuMatrix; gcc then allocates the walk's
// registers differently), and with gcc and clang from C alone
// (-DPUMPMODEL_NO_ASM), and requires every build to print the same bytes
// (score checks it) and those to be the interpreter's, in double and
// float, the driver checking NAME_predict_batch over all rows and over
// runs of 1 to 70 rows against NAME_predict. The golden cases include NaN
// to both sides, several outputs and float32 sums; the random forests of
// depth 4 (neighbourForests) put rows at, beside and a float away from
// every threshold, and NaN, ±inf, ±0 and subnormals; float32 models and
// float builds take the packed walk (float keys), float64 models' double
// builds the walk of double keys, and the test requires both to occur.
// Cost: 6 cases and 8 forests in the perfect layout x 2 variants x 5
// builds, about 12 s of gcc/clang on 2 idle cores.
func TestCPerfectWalks(t *testing.T) {
	testenv.Need(t, cTools(true))
	noAsm := "O2 -D" + strings.ToUpper(cName) + "_NO_ASM"
	matrix := cpuMatrix(t, []cBuild{{"gcc", "c99", "O2", false}, {"gcc", "c99", noAsm, false}, {"clang", "c11", noAsm, false}},
		cpuBuilds{"avx512f", "AVX-512F", []cBuild{{"gcc", "c99", "O2 -march=x86-64-v4", false}, {"clang", "c11", "O2 -march=x86-64-v4", false}}})
	checkLayoutBuilds(t, ctarget.Perfect, perfectCases, matrix)
	r := testCRunner()
	paths := map[bool]int{}
	for _, c := range neighbourForests(t, 1) {
		for _, variant := range r.Variants() {
			p, _, err := compile.Compile(c.f, r.CompileOptions(variant))
			require.NoError(t, err)
			if variant == "float" && ctarget.FitsFloat(p) != nil {
				continue
			}
			o := r.options(ctarget.Perfect, variant)
			got, why, err := ctarget.Resolve(p, o)
			require.NoError(t, err)
			if got != ctarget.Perfect { // zero-as-missing splits, a split with no <= form: TestPerfectFallsBack
				t.Logf("%s/%s: %s", c.name, variant, why)
				continue
			}
			files, err := ctarget.Emit(p, o)
			require.NoError(t, err)
			packed := false
			for _, f := range files {
				packed = packed || strings.Contains(string(f.Data), "_PF_STEP(i0, 0u);")
			}
			paths[packed]++
			t.Run(fmt.Sprintf("%s/%s/packed=%v", c.name, variant, packed), func(t *testing.T) {
				t.Parallel()
				res, err := r.score(context.Background(), p, o, c.rows, t.TempDir(), matrix, false)
				require.NoError(t, err)
				want, wantCls := cReference(c.f, c.rows, variant == "float")
				exact, bound := r.Tolerance(variant, p)
				m := Compare(want, res.Outputs, wantCls, res.Classes, c.f.NumOutputs(), exact, bound)
				require.True(t, m.OK(), "%s", m)
			})
		}
	}
	require.Positive(t, paths[true], "no forest took the packed walk")
	require.Positive(t, paths[false], "no forest took the walk of double keys")
}

// perfectDepthsTested is the deepest forest TestCPerfectDepths builds:
// deeper ones of perfectForestOfDepth, pruned by compile where their
// random splits contradict, hold less than a quarter of their padding and
// fall back to the table layout (perfectMaxGrowth).
const perfectDepthsTested = 7

// TestCPerfectDepths builds the perfect layout in float, one output, for
// forests of every depth from 1 to perfectDepthsTested (the packed walk: float
// keys), with the step's inline assembly, from C alone (-DDEEP_NO_ASM) and,
// where the CPU runs it, with -march=x86-64-v4, and checks
// NAME_predict_batch over every prefix of the rows (values at and next to
// thresholds, NaN, ±inf, ±0) against NAME_predict byte for byte, and the
// builds' outputs against each other; each forest once as compiled (splits
// x <= t: keys over a low half of zeros) and once with every split a <
// (the walk goes right at x >= t: keys over ones, and -0 >= 0 must hold).
// Cost: 14 forests, 42 builds with gcc -O2, about 9 s.
func TestCPerfectDepths(t *testing.T) {
	testenv.Need(t, cTools(false))
	flags := [][]string{nil, {"-DDEEP_NO_ASM"}, {"-march=x86-64-v4"}}
	if err := hasCPUFlag("avx512f", "AVX-512F"); err != nil {
		t.Logf("the -march=x86-64-v4 builds left out: %v", err)
		flags = flags[:2]
	}
	for depth := 1; depth <= perfectDepthsTested; depth++ {
		for _, lt := range []bool{false, true} {
			p, values := perfectForestOfDepth(t, depth)
			if lt { // every split a <: the walk compares key >= t, and -0 >= 0 must hold
				for ti := range p.Trees {
					for ni := range p.Trees[ti].Nodes {
						p.Trees[ti].Nodes[ni].Op = compile.LT
					}
				}
			}
			t.Run(fmt.Sprintf("depth%d/lt=%v", depth, lt), func(t *testing.T) {
				checkPerfectWalks(t, p, values, flags)
			})
		}
	}
}

// checkPerfectWalks emits p in the perfect layout (float), requires the
// packed walk in the file, and runs runBlockParts with each of flags,
// requiring the same outputs of every build.
func checkPerfectWalks(t *testing.T, p *compile.Program, values []float64, flags [][]string) {
	o := ctarget.Options{Layout: ctarget.Perfect, Float: true, Name: "deep"}
	files, err := ctarget.Emit(p, o)
	require.NoError(t, err)
	text := ""
	for _, f := range files {
		text += string(f.Data)
	}
	require.True(t, strings.Contains(text, "DEEP_PF_STEP(i0, 0u);"), "the packed walk is not written: %s", strings.SplitN(text, "\n", 6)[4])
	var first []float64
	for _, f := range flags {
		got, _ := runBlockParts(t, p, o, values, f...)
		if first == nil {
			first = got
			continue
		}
		require.Equal(t, first, got, "%v against no flags", f)
	}
}

// perfectForestOfDepth builds a forest of 12 full trees of the given
// depth over three features (random splits on eight thresholds, NaN either
// way, distinct leaf values; every third tree's left child a leaf, so its
// padding is walked), compiled for float C, and rows that put every
// feature at, beside and a float away from every threshold, NaN, ±inf
// and ±0.
func perfectForestOfDepth(t *testing.T, depth int) (*compile.Program, []float64) {
	rng := rand.New(rand.NewPCG(uint64(depth), 15))
	ts := []float64{-2.5, -1, -0.375, 0, 0.125, 0.5, 1.75, 3}
	f := &forest.Forest{Task: forest.Regression, Features: []string{"a", "b", "c"}, Combine: forest.Sum, InputPrecision: forest.Float32}
	for ti := 0; ti < 12; ti++ {
		splits := 1<<depth - 1
		var nodes []cNode
		for i := 0; i < 2*splits+1; i++ {
			if i >= splits || (ti%3 == 0 && i == 1) {
				nodes = append(nodes, cLeaf(float64(ti*64+i)*0.25))
				continue
			}
			nodes = append(nodes, cSplit(rng.IntN(3), ts[rng.IntN(len(ts))], 2*i+1, 2*i+2, rng.IntN(2) == 0))
		}
		f.Trees = append(f.Trees, cTree(nodes...))
	}
	f = mustValidate(t, f)
	p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(true))
	require.NoError(t, err)
	vals := []float64{math.NaN(), 0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1)}
	for _, th := range ts {
		t32 := float32(th)
		vals = append(vals, th, float64(math.Nextafter32(t32, float32(math.Inf(1)))), float64(math.Nextafter32(t32, float32(math.Inf(-1)))))
	}
	return p, valueRows(f, vals, 7).Values
}
