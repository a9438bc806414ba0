package verify

import (
	"context"
	"fmt"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
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

// TestCPerfectLanes builds the perfect layout without target flags (the
// scalar walk), with -mavx2 (scalar too: see emit/ctarget/perfect_simd.go)
// and with -march=x86-64-v4 (the AVX-512 lanes) in gcc and clang, where
// the CPU runs them (cpuMatrix), and
// requires every build to print the same bytes (score checks it) and those
// to be the interpreter's, in double and float, the driver checking
// NAME_predict_batch over all rows and over runs of 1 to 70 rows against
// NAME_predict. The golden cases include NaN to both sides, several outputs
// and float32 sums; the random forests of depth 4 (neighbourForests) put
// rows at, beside and a float away from every threshold, and NaN, ±inf,
// ±0 and subnormals; float32 models and float builds take the lanes,
// float64 models' double builds (double keys) and several outputs the
// scalar walk, and the test requires both to occur. Cost: 6 cases and 8
// forests in the perfect layout x 2 variants x 4 builds, about 30 s of
// gcc/clang on 2 shared cores.
func TestCPerfectLanes(t *testing.T) {
	testenv.Need(t, cTools(true))
	matrix := cpuMatrix(t, []cBuild{{"gcc", "c99", "O2", false}},
		cpuBuilds{"avx2", "AVX2", []cBuild{{"gcc", "c99", "O2 -mavx2", false}}},
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
			lanes := false
			for _, f := range files {
				lanes = lanes || strings.Contains(string(f.Data), "_pf_avx512(key, used, sum)")
			}
			paths[lanes]++
			t.Run(fmt.Sprintf("%s/%s/lanes=%v", c.name, variant, lanes), func(t *testing.T) {
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
	require.Positive(t, paths[true], "no forest took the AVX-512 lanes")
	require.Positive(t, paths[false], "no forest took the scalar walk")
}
