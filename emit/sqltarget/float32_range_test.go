package sqltarget

import (
	"errors"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// TestFloat32PastRangeRefused: a float32 model whose base score or transform
// scale rounds to an infinity in float32 (differential seed 126 and a
// 300-model CI run found both) is refused as a model SQL cannot write, an
// emit.Unsupported naming the value, in every dialect: SQL has no portable
// infinity literal, and no other number would score the same. So is one
// whose leaves, summed in float32 and scaled, can reach float32's range
// (differential seed 1094: the interpreter's sum becomes an infinity, and
// softmax makes it NaN, where the engines stayed finite); one well inside
// the range is written.
func TestFloat32PastRangeRefused(t *testing.T) {
	for _, tc := range []struct {
		name  string
		base  float64
		scale float64
		leaf  float64
		want  string
	}{
		{"base", -3.5e38, 0, 2, "a base score of -Inf"},
		{"scale", 0, 1e39, 2, "a transform scale of 1e+39"},
		{"sum", 0, 1.0000001, 3.4028234663852886e+38, "float32 sums that can reach float32's range"},
		{"inside", 0x1p100, 2, 0x1p120, ""},
	} {
		f := &forest.Forest{Task: forest.Regression, InputPrecision: forest.Float64, Accumulate: forest.Float32,
			Combine: forest.Sum, Transform: forest.NoTransform, Features: []string{"x"},
			BaseScore: []float64{tc.base}, TransformScale: tc.scale}
		f.Trees = []forest.Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{0.5, 0, 0},
			Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: make([]bool, 3), Value: []float64{0, 1, tc.leaf}}}
		require.NoError(t, f.Validate(tc.name))
		p, _, err := compile.Compile(f, compile.Options{})
		require.NoError(t, err)
		for _, d := range []Dialect{SQLite, Postgres, DuckDB, ANSI} {
			_, err := Emit(p, Options{Dialect: d, Table: "t"})
			if tc.want == "" {
				require.NoError(t, err, "%s %s", tc.name, d)
				continue
			}
			var u *emit.Unsupported
			require.True(t, errors.As(err, &u), "%s %s: %v", tc.name, d, err)
			require.Contains(t, err.Error(), tc.want)
			_, err = Stages(p, Options{Dialect: d, Table: "t"})
			require.Error(t, err, "Stages must refuse too, not panic")
		}
	}
}
