package ctarget

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"
)

// countsOf recovers the class counts of shares c_j/n from their doubles
// (and, n small, from their floats, as a float32 model holds them), and refuses values
// that are no such fractions: a share off by one ulp, shares not summing
// to one, a denominator past 65535, a negative value.
func TestCountsOf(t *testing.T) {
	for _, f32 := range []bool{false, true} {
		narrow := func(v float64) float64 {
			if f32 {
				return float64(float32(v))
			}
			return v
		}
		for _, c := range [][]uint32{{1, 0}, {0, 7}, {3, 4}, {1, 2, 3}, {40000, 25535}, {1, 65534}, {255, 1}, {17, 83, 255}} {
			n := sum32(c)
			v := make([]float64, len(c))
			for j := range c {
				v[j] = narrow(float64(c[j]) / float64(n))
			}
			got := countsOf(v, f32)
			if f32 && n > 1<<12 && got == nil {
				continue // a float's 24 bits may hold a simpler fraction than c/n
			}
			require.NotNil(t, got, "f32 %v: %v", f32, c)
			m := sum32(got)
			for j := range c {
				require.Equal(t, v[j], narrow(float64(got[j])/float64(m)), "f32 %v: %v gives %v", f32, c, got)
			}
			if !f32 {
				require.Equal(t, c[0]*m, got[0]*n, "the same fraction")
			}
		}
		offThird := math.Nextafter(1.0/3, 1) // one ulp above the share 1/3
		if f32 {
			offThird = float64(math.Nextafter32(float32(1.0/3), 1))
		}
		for _, v := range [][]float64{
			{offThird, narrow(2.0 / 3)},
			{0.5, 0.25},
			{narrow(1.0 / 65537), narrow(65536.0 / 65537)},
			{-0.5, 1.5},
			{math.Pi / 4, 1 - math.Pi/4},
		} {
			if f32 && v[0] == narrow(1.0/65537) {
				continue // a float holds too little to tell 1/65537 from simpler fractions
			}
			require.Nil(t, countsOf(v, f32), "f32 %v: %v", f32, v)
		}
	}
}
