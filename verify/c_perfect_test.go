package verify

import (
	"context"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
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
	if err := cTools(true); err != nil {
		if requireEngines {
			t.Fatalf("C compilers: %v, and SAWMILL_REQUIRE_ENGINES is set", err)
		}
		t.Skipf("C compilers: %v", err)
	}
	cases, err := goldencase.Cases(filepath.Join("..", "golden", "testdata"))
	require.NoError(t, err)
	byName := map[string]*goldencase.Case{}
	for _, c := range cases {
		byName[c.Name] = c
	}
	matrix := []cBuild{{"gcc", "c99", "O2", false}, {"gcc", "c11", "O3", false}, {"clang", "c11", "O2", true}}
	r := testCRunner()
	for _, name := range perfectCases {
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
				o := r.options(ctarget.Perfect, variant)
				layout, why, err := ctarget.Resolve(p, o)
				require.NoError(t, err)
				require.Equal(t, ctarget.Perfect, layout, why)
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
