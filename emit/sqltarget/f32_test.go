package sqltarget

import (
	"math"
	"math/rand/v2"
	"testing"
)

// round32Cases are the edges of float32 rounding: ties between
// neighbours (odd and even), binade edges, the subnormal range and its
// edge with the normals, and the overflow edge.
func round32Cases() []float64 {
	var xs []float64
	for _, f := range []float32{1, 1.5, 3, 0.1, 16777216, 8388608, math.MaxFloat32, math.SmallestNonzeroFloat32,
		0x1p-126, 0x1.fffffcp-127, 0x1p-149 * 3, 7, 123456.789, 0x1p127, 0x1.000002p0} {
		for _, g := range []float32{f, math.Nextafter32(f, 0), math.Nextafter32(f, float32(math.Inf(1)))} {
			a, b := float64(g), float64(math.Nextafter32(g, float32(math.Inf(1))))
			mid := a + (b-a)/2 // exact: a tie between two neighbours
			for _, x := range []float64{a, mid, math.Nextafter(mid, 0), math.Nextafter(mid, math.Inf(1)), math.Nextafter(a, 0), math.Nextafter(a, 2*a)} {
				xs = append(xs, x, -x)
			}
		}
	}
	return append(xs, 0, math.Copysign(0, -1), f32Overflow, math.Nextafter(f32Overflow, 0), f32Half,
		math.Nextafter(f32Half, 1), 0x1p-151, 5e-324, math.MaxFloat64, 1e300, 0x1p-127*3)
}

// TestRound32 holds Round32, the arithmetic that r32 writes for SQLite and
// ANSI, to Go's float32 conversion (IEEE 754 round to nearest, ties to
// even) bit for bit, over the edge cases and millions of random doubles:
// random bit patterns (every binade, the subnormals), random ties, and
// values near float32's range.
func TestRound32(t *testing.T) {
	check := func(x float64) {
		t.Helper()
		if math.IsNaN(x) {
			return
		}
		want := float64(float32(x))
		if got := Round32(x); math.Float64bits(got) != math.Float64bits(want) {
			t.Fatalf("Round32(%v = %#x) = %v, float32 gives %v", x, math.Float64bits(x), got, want)
		}
	}
	for _, x := range round32Cases() {
		check(x)
	}
	rng := rand.New(rand.NewPCG(1, 2))
	n := 3_000_000
	if testing.Short() {
		n = 300_000
	}
	for i := 0; i < n; i++ {
		switch i % 4 {
		case 0: // any double whose exponent is near float32's range
			e := rng.IntN(320) - 170
			check(math.Ldexp(1+rng.Float64(), e) * float64(1-2*rng.IntN(2)))
		case 1: // a tie: a random 25-bit significand whose last bit is set
			m := float64(rng.Int64N(1<<24)<<1 | 1)
			check(math.Ldexp(m, rng.IntN(300)-175))
		case 2: // a random bit pattern
			x := math.Float64frombits(rng.Uint64())
			if !math.IsNaN(x) {
				check(x)
			}
		case 3: // next to a float32
			f := math.Float32frombits(rng.Uint32())
			if !math.IsNaN(float64(f)) && !math.IsInf(float64(f), 0) {
				check(math.Nextafter(float64(f), math.Inf(2*rng.IntN(2)-1)))
			}
		}
	}
}
