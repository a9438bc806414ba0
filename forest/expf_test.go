package forest

import (
	"math"
	"os"
	"sync"
	"testing"

	"github.com/sawmill-dev/sawmill/forest/internal/libm"
)

// The reference for Expf is the C library's expf (glibc on the machines
// sawmill is tested on; XGBoost calls it for its float32 logistic and
// softmax). The normal test checks every 257th bit pattern (about 16.7
// million inputs, all exponents and signs) plus the edges around each
// special-case threshold; setting SAWMILL_EXPF_ALL=1 checks all 2^32:
//
//	SAWMILL_EXPF_ALL=1 go test ./forest -run TestExpfMatchesLibm -v -timeout 30m
//
// Without cgo (no C compiler) the test skips, and fails when
// SAWMILL_REQUIRE_ENGINES is set, as CI sets it.
func TestExpfMatchesLibm(t *testing.T) {
	if !libm.Available {
		if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
			t.Fatal("the C library's expf is not reachable: this build has no cgo (is gcc installed? CGO_ENABLED=1?)")
		}
		t.Skip("no cgo: cannot call the C library's expf")
	}
	// Edges: each threshold of the special cases, ±0, ±Inf, NaNs,
	// subnormals, 1, and the ends of every exponent.
	var edges []uint32
	for _, c := range []float32{0x1.62e42ep6, -0x1.9fe368p6, -0x1.9d1d9ep6, 88, -88, 0, 1, -1,
		float32(math.Inf(1)), float32(math.Inf(-1)), math.MaxFloat32, -math.MaxFloat32, 0x1p-149, -0x1p-149} {
		b := math.Float32bits(c)
		for d := uint32(0); d < 2000; d++ {
			edges = append(edges, b+d, b-d)
		}
	}
	for e := uint32(0); e < 256; e++ {
		for _, s := range []uint32{0, 1 << 31} {
			for _, m := range []uint32{0, 1, 2, 0x7fffff, 0x7ffffe, 0x400000} {
				edges = append(edges, s|e<<23|m)
			}
		}
	}
	want := make([]float32, 1)
	bad := 0
	for _, b := range edges {
		libm.ExpfBits(b, 1, want)
		bad += checkExpf(t, b, want[0], bad)
	}
	stride, n := uint32(257), uint64(1<<32)/257+1
	if os.Getenv("SAWMILL_EXPF_ALL") != "" {
		stride, n = 1, 1<<32
	}
	mism, f64 := expfSweep(t, stride, n)
	t.Logf("checked %d inputs with stride %d and %d edges: %d differ from the C library; float32(math.Exp) differs on %d (%.4f%%)",
		n, stride, len(edges), mism, f64, 100*float64(f64)/float64(n))
	if mism+uint64(bad) > 0 {
		t.Fatalf("%d inputs differ from the C library's expf", mism+uint64(bad))
	}
}

func checkExpf(t *testing.T, b uint32, want float32, bad int) int {
	x := math.Float32frombits(b)
	got := Expf(x)
	if math.Float32bits(got) == math.Float32bits(want) || got != got && want != want {
		return 0
	}
	if bad < 10 {
		t.Errorf("Expf(%x = %g) = %x (%g), the C library gives %x (%g)", b, x, math.Float32bits(got), got,
			math.Float32bits(want), want)
	}
	return 1
}

// expfSweep compares n inputs start from 0 by stride on two goroutines and
// returns how many differ, and how many float32(math.Exp(x)) gets wrong.
func expfSweep(t *testing.T, stride uint32, n uint64) (mism, f64 uint64) {
	const chunk = 1 << 20
	var mu sync.Mutex
	var wg sync.WaitGroup
	for w := uint64(0); w < 2; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			want := make([]float32, chunk)
			var bad, off uint64
			for c := w * chunk; c < n; c += 2 * chunk {
				m := min(uint64(chunk), n-c)
				start := uint32(c) * stride
				libm.ExpfBits(start, stride, want[:m])
				for i := uint64(0); i < m; i++ {
					b := start + uint32(i)*stride
					x := math.Float32frombits(b)
					w := want[i]
					if g := Expf(x); math.Float32bits(g) != math.Float32bits(w) && !(g != g && w != w) {
						bad++
					}
					if g := float32(math.Exp(float64(x))); g != w && !(g != g && w != w) {
						off++
					}
				}
			}
			mu.Lock()
			mism += bad
			f64 += off
			mu.Unlock()
		}()
	}
	wg.Wait()
	return mism, f64
}
