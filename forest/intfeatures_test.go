package forest

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"
)

// intForest has depth-3 trees over two features whose thresholds are
// fractions and integers, negative and positive, in float64 or float32.
func intForest(t *testing.T, rng *rand.Rand, prec Precision) *Forest {
	f := &Forest{Task: Regression, Features: []string{"count", "level"}, Combine: Sum, Transform: NoTransform, InputPrecision: prec, BaseScore: []float64{0}}
	for ti := 0; ti < 8; ti++ {
		var tr Tree
		for i := 0; i < 15; i++ {
			if i < 7 {
				th := math.Round(rng.Float64()*40-20) + []float64{0, 0.5, 0.25, -0.75, 0.999}[rng.IntN(5)]
				tr.Feature = append(tr.Feature, rng.IntN(2))
				tr.Threshold = append(tr.Threshold, th)
				tr.Left, tr.Right = append(tr.Left, 2*i+1), append(tr.Right, 2*i+2)
			} else {
				tr.Feature, tr.Threshold = append(tr.Feature, -1), append(tr.Threshold, 0)
				tr.Left, tr.Right = append(tr.Left, -1), append(tr.Right, -1)
			}
			tr.MissingLeft = append(tr.MissingLeft, i%2 == 0)
			tr.Value = append(tr.Value, float64(ti*16+i))
		}
		f.Trees = append(f.Trees, tr)
	}
	require.NoError(t, f.Validate("int"))
	return f
}

// The floored copy scores every integer row as the model does, and a
// non-integer row as the model scores its ceiling; the other feature is
// untouched.
func TestWithIntegerFeatures(t *testing.T) {
	for _, prec := range []Precision{Float64, Float32} {
		rng := rand.New(rand.NewPCG(7, 1))
		f := intForest(t, rng, prec)
		g, changed, err := f.WithIntegerFeatures([]string{"count"})
		require.NoError(t, err)
		require.Positive(t, changed)
		before := f.Trees[0].Threshold[0]
		defer func() { require.Equal(t, before, f.Trees[0].Threshold[0], "the model itself is not changed") }()
		require.NoError(t, g.Validate("floored"))
		want, got := make([]float64, 1), make([]float64, 1)
		for c := -25.0; c <= 25; c += 0.25 {
			for _, level := range []float64{-20.5, -3, 0, 0.5, 7.25, 19.999, math.NaN()} {
				g.Predict([]float64{c, level}, got)
				f.Predict([]float64{math.Ceil(c), level}, want)
				require.Equal(t, want[0], got[0], "%s count=%v level=%v", prec, c, level)
			}
		}
		differs := false
		for c := -25.0; c <= 25 && !differs; c += 0.25 {
			f.Predict([]float64{c, 0}, want)
			g.Predict([]float64{c, 0}, got)
			differs = want[0] != got[0]
		}
		require.True(t, differs, "some fraction scores differently, so the check can fail")
	}
	_, _, err := intForest(t, rand.New(rand.NewPCG(1, 1)), Float64).WithIntegerFeatures([]string{"nope"})
	require.ErrorContains(t, err, `integer feature "nope" is not one of the model's 2 features`)
}
