package verify

import (
	"context"
	"errors"
	"slices"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
)

// The constant-time walk (ctarget.Options.ConstantTime) scores bit for bit
// as the interpreter, as the binned layout it rewrites does: on every
// golden case it can write, double and float builds, and at every
// threshold's neighbours (the binned layout's neighbour walk, with its
// rounded double builds, missing values both ways, zero as missing and a
// missing_value).

// ctRunner is the host C runner in constant time.
func ctRunner() cRunner {
	r := testCRunner()
	r.ConstantTime = true
	return r
}

// checkConstantTime scores p in constant time for variant and compares
// with the interpreter's outputs want and classes wantCls.
func checkConstantTime(t *testing.T, p *compile.Program, variant string, rows *forest.Rows, want []float64, wantCls []int) {
	r := ctRunner()
	res, err := r.Score(context.Background(), p, emit.Binned, variant, rows, t.TempDir())
	if variant == "float" && ctarget.FitsFloat(p) != nil {
		require.ErrorIs(t, err, ErrDeclined)
		return
	}
	require.NoError(t, err, variant)
	exact, bound := r.Tolerance(variant, p)
	m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound)
	require.True(t, m.OK(), "%s: %s", variant, m)
	t.Logf("%s: %d rows, %s", variant, rows.Len(), m)
}

func TestCConstantTimeGolden(t *testing.T) {
	requireC(t)
	cases, err := goldencase.Cases(goldenCases)
	require.NoError(t, err)
	r, ran := ctRunner(), 0
	for _, c := range cases {
		if c.WantErr != "" || len(c.Flags.Runners) > 0 && !slices.Contains(c.Flags.Runners, r.Name()) || c.Flags.Slow {
			continue
		}
		for _, variant := range r.Variants() {
			p, _, err := compile.Compile(c.Model, r.CompileOptions(variant))
			require.NoError(t, err)
			if _, _, err := ctarget.Resolve(p, ctarget.Options{ConstantTime: true}); err != nil {
				require.ErrorContains(t, err, "set split", c.Name) // the one refusal
				continue
			}
			ran++
			t.Run(c.Name+"-"+variant, func(t *testing.T) {
				t.Parallel()
				want, wantCls := c.ReferenceFor(r, variant)
				checkConstantTime(t, p, variant, c.Rows, want, wantCls)
			})
		}
	}
	require.Greater(t, ran, 40, "golden builds in constant time")
}

func TestCConstantTimeNeighbours(t *testing.T) {
	requireC(t)
	for _, c := range neighbourForests(t, 3) {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			for _, variant := range ctRunner().Variants() {
				p, _, err := compile.Compile(c.f, ctRunner().CompileOptions(variant))
				require.NoError(t, err)
				want, wantCls := cReference(c.f, c.rows, variant == "float")
				checkConstantTime(t, p, variant, c.rows, want, wantCls)
			}
		})
	}
}

// Constant time refuses the layouts whose walk stops at the leaf, and set
// splits, saying why.
func TestCConstantTimeRefuses(t *testing.T) {
	c, err := goldencase.LoadCase(goldenCases+"/v2-set-exact", "v2-set-exact")
	require.NoError(t, err)
	p, _, err := compile.Compile(c.Model, compile.Options{})
	require.NoError(t, err)
	_, err = ctarget.Emit(p, ctarget.Options{ConstantTime: true})
	require.ErrorContains(t, err, "constant-time")
	require.ErrorContains(t, err, "set split")
	for _, l := range []string{emit.Table, emit.Nested, ctarget.Bitvector} {
		_, _, err := ctarget.Resolve(p, ctarget.Options{ConstantTime: true, Layout: l})
		require.ErrorContains(t, err, "depends on the input", l)
	}
	var u *emit.Unsupported
	_, _, err = ctarget.Resolve(p, ctarget.Options{ConstantTime: true})
	require.True(t, errors.As(err, &u), "a set split is emit.Unsupported")
}
