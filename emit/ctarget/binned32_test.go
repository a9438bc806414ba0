package ctarget

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"
)

// round32Ref rounds x to a float the way mode says, with Go's conversion
// (round to nearest even, The Go Programming Language Specification,
// "Conversions", IEEE 754 roundTiesToEven) and a step to the float
// neighbour where that rounded the wrong way.
func round32Ref(x float64, mode string) float32 {
	f := float32(x)
	switch {
	case mode == roundUp && float64(f) < x:
		f = math.Nextafter32(f, float32(math.Inf(1)))
	case mode == roundDown && float64(f) > x:
		f = math.Nextafter32(f, float32(math.Inf(-1)))
	}
	return f
}

// round32Bits agrees with the reference on the edges of float range,
// every float's neighbours and midpoints, and random doubles of every
// exponent.
func TestRound32Bits(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 14))
	xs := []float64{0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), 5e-324, -5e-324, math.MaxFloat64, -math.MaxFloat64,
		0x1p-149, 0x1p-150, 0x1.8p-150, 0x1p-151, 0x1p-126, 0x1p128, math.MaxFloat32, 0x1.fffffefp127, 0x1.ffffffp127, 0x1.ffffff1p127}
	for i := 0; i < 2000; i++ {
		f := math.Float32frombits(rng.Uint32())
		if math.IsNaN(float64(f)) {
			continue
		}
		next := math.Nextafter32(f, float32(math.Inf(1)))
		mid := float64(f)/2 + float64(next)/2
		xs = append(xs, float64(f), mid, math.Nextafter(mid, 0), math.Nextafter(mid, math.Inf(1)),
			math.Nextafter(float64(f), 0), math.Nextafter(float64(f), math.Inf(1)))
		xs = append(xs, math.Float64frombits(rng.Uint64()&^(0x7ff<<52)|uint64(rng.IntN(2047))<<52))
	}
	for _, x := range xs {
		for _, mode := range []string{roundNearest, roundUp, roundDown} {
			require.Equal(t, math.Float32bits(round32Ref(x, mode)), round32Bits(math.Float64bits(x), mode), "%s %x", mode, x)
			require.Equal(t, math.Float32bits(round32Ref(-x, mode)), round32Bits(math.Float64bits(-x), mode), "%s %x", mode, -x)
		}
	}
}

// roundFor picks up for float cuts, down for the doubles just below
// floats, and none for a mix or other doubles.
func TestRoundFor(t *testing.T) {
	below := func(v float64) float64 { return math.Nextafter(v, math.Inf(-1)) }
	require.Equal(t, roundUp, roundFor([]float64{0.5, 16.795000076293945, math.Inf(-1), math.Inf(1)}))
	require.Equal(t, roundDown, roundFor([]float64{below(0.5), below(0x1p-140), math.MaxFloat64, math.Inf(1)}))
	require.Equal(t, roundNone, roundFor([]float64{0.5, below(0.5), 1}))
	require.Equal(t, roundNone, roundFor([]float64{0.1}))
	require.Equal(t, float32(0.5), cut32(0.5, roundUp))
	require.Equal(t, math.Nextafter32(0.5, 0), cut32(below(0.5), roundDown))
}
