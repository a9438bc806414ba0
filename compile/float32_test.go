package compile

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// thresholds32 is a spread of thresholds that exercise the float32 rule:
// float32 values, exact midpoints between neighbouring float32s (where
// round-half-even decides), values just off those, subnormals, the edges of
// float32's range and beyond it, and random doubles of every magnitude.
func thresholds32(rng *rand.Rand) []float64 {
	ts := []float64{0, math.Copysign(0, -1), 1, -1, 0.1, -0.1, 61.5, 1e-40, -1e-40, 1e-45, 1.4e-45, 2.9e-45,
		math.MaxFloat32, -math.MaxFloat32, math.MaxFloat32 * 1.0000001, -math.MaxFloat32 * 1.0000001,
		1e39, -1e39, 1e300, -1e300, math.SmallestNonzeroFloat64, 0x1p-149, 0x1p-150, 0x1p-126, 16777217}
	for i := 0; i < 400; i++ {
		f := math.Float32frombits(rng.Uint32())
		if math.IsNaN(float64(f)) || math.IsInf(float64(f), 0) {
			continue
		}
		g := math.Nextafter32(f, float32(math.Inf(1)))
		mid := float64(f)/2 + float64(g)/2
		if !math.IsInf(float64(g), 0) {
			ts = append(ts, mid, math.Nextafter(mid, math.Inf(1)), math.Nextafter(mid, math.Inf(-1)))
		}
		ts = append(ts, float64(f))
		ts = append(ts, math.Float64frombits(rng.Uint64()&^(0x7ff<<52)|uint64(rng.IntN(2046)+1)<<52))
	}
	return ts
}

// walk64 returns x and its n float64 neighbours on each side.
func walk64(x float64, n int) []float64 {
	out := []float64{x}
	lo, hi := x, x
	for i := 0; i < n; i++ {
		lo, hi = math.Nextafter(lo, math.Inf(-1)), math.Nextafter(hi, math.Inf(1))
		out = append(out, lo, hi)
	}
	return out
}

// The float64-input form: for every threshold and every float64 near the
// threshold, near its float32 neighbours and near the midpoint between them,
// `round32(x) <= t` (IEEE 754-2019 section 4.3.1, round to nearest, ties to
// even: Go's float32 conversion on this hardware) equals `x op m`.
func TestMidpoint32Exhaustive(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	checked := 0
	for _, th := range thresholds32(rng) {
		op, m := Midpoint32(th)
		t32 := Floor32(th)
		u := math.Nextafter32(t32, float32(math.Inf(1)))
		var xs []float64
		for _, c := range []float64{th, float64(t32), float64(u), m} {
			if !math.IsInf(c, 0) {
				xs = append(xs, walk64(c, 40)...)
			}
		}
		xs = append(xs, math.Inf(1), math.Inf(-1), 0, math.Copysign(0, -1), math.MaxFloat64, -math.MaxFloat64)
		for _, x := range xs {
			want := forest.Round32(x) <= th
			got := op == LE && x <= m || op == LT && x < m
			if got != want {
				t.Fatalf("t=%v (%#x): x=%v (%#x): round32(x)<=t is %v, x %v %v is %v",
					th, math.Float64bits(th), x, math.Float64bits(x), want, op, m, got)
			}
			checked++
		}
	}
	t.Logf("%d (threshold, input) pairs agree", checked)
}

// The float32-input form: for every float32 x near the threshold's float32
// neighbours, `x <= t` (and `x < t`) in float64 equals the Single32
// comparison, whose threshold is a finite float32.
func TestSingle32Exhaustive(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, th := range thresholds32(rng) {
		for _, op := range []Op{LE, LT} {
			op2, t2 := Single32(op, th)
			if float64(float32(t2)) != t2 || math.IsInf(t2, 0) {
				t.Fatalf("Single32(%v, %v) = %v, not a finite float32", op, th, t2)
			}
			c := Floor32(th)
			if math.IsInf(float64(c), 0) {
				c = -math.MaxFloat32
			}
			xs := []float32{c, float32(math.Inf(1)), float32(math.Inf(-1))}
			lo, hi := c, c
			for i := 0; i < 40; i++ {
				lo, hi = math.Nextafter32(lo, float32(math.Inf(-1))), math.Nextafter32(hi, float32(math.Inf(1)))
				xs = append(xs, lo, hi)
			}
			for _, x32 := range xs {
				x := float64(x32)
				want := op == LE && x <= th || op == LT && x < th
				got := op2 == LE && x32 <= float32(t2) || op2 == LT && x32 < float32(t2)
				if got != want {
					t.Fatalf("%v %v: x=%v: want %v, got %v (%v %v)", op, th, x32, want, got, op2, t2)
				}
			}
		}
	}
}

// The missing band and the zero bound in the float64-input form: for every
// float32 value v (zeros, subnormals, the ends of float32's range, ±Inf,
// random values, the zero_missing bound), every float64 near v, near the
// ends of Round32Range(v) and near the midpoints to v's neighbours has
// round32(x) == v exactly when it lies in Round32Range(v) (IEEE 754-2019
// 4.3.1, ties to even, as Go's float32 conversion does). The zero bound the
// pass derives is checked the same way against |round32(x)| <= bound.
func TestRound32RangeExhaustive(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	vs := []float32{0, float32(math.Copysign(0, -1)), 1, -1, -999, 0x1p-149, -0x1p-149, 0x1p-126, 16777216,
		math.MaxFloat32, -math.MaxFloat32, float32(math.Inf(1)), float32(math.Inf(-1)), float32(forest.ZeroMissingBound)}
	for _, th := range thresholds32(rng) {
		if v := float32(th); !math.IsNaN(float64(v)) {
			vs = append(vs, v)
		}
	}
	checked := 0
	for _, v := range vs {
		lo, hi := Round32Range(v)
		var xs []float64
		down := math.Nextafter32(v, float32(math.Inf(-1)))
		up := math.Nextafter32(v, float32(math.Inf(1)))
		for _, c := range []float64{float64(v), lo, hi, float64(down)/2 + float64(v)/2, float64(up)/2 + float64(v)/2} {
			if !math.IsInf(c, 0) && !math.IsNaN(c) {
				xs = append(xs, walk64(c, 30)...)
			}
		}
		xs = append(xs, math.Inf(1), math.Inf(-1), math.MaxFloat64, -math.MaxFloat64)
		for _, x := range xs {
			want := float32(x) == v
			got := lo <= x && x <= hi
			if got != want {
				t.Fatalf("v=%v: x=%v (%#x): round32(x)==v is %v, x in [%v, %v] is %v", v, x, math.Float64bits(x), want, lo, hi, got)
			}
			checked++
		}
	}
	for _, z := range []float64{forest.ZeroMissingBound, 0, 1e-40, 1, 0.1} {
		p := &Program{Compare: Round32, ZeroBound: z}
		p.Trees = []Tree{{Nodes: []Node{{Feature: -1, Left: -1, Right: -1}}}}
		float32Compare(p)
		for _, c := range []float64{z, p.ZeroBound, -z, -p.ZeroBound} {
			for _, x := range walk64(c, 30) {
				want := math.Abs(forest.Round32(x)) <= z
				got := -p.ZeroBound <= x && x <= p.ZeroBound
				if got != want {
					t.Fatalf("zero bound %v: x=%v: |round32(x)| <= bound is %v, the pass's test %v is %v", z, x, want, p.ZeroBound, got)
				}
				checked++
			}
		}
	}
	t.Logf("%d (value, input) pairs agree", checked)
}

// Set splits, zero_missing and the missing band through the float32 pass:
// for a float32-input model, every float64 near a category's edges (its
// integer, the next, the midpoints to their float32 neighbours, around 2^23,
// 2^24 and 2^31), near the zero bound and near the missing value routes in
// the float64-input form (Double, CategoryRound32) and, rounded, in the
// float32-input form (Single) exactly as the interpreter routes it, under
// every category rule.
func TestFloat32RewriteRoutesExhaustive(t *testing.T) {
	cats := []int32{0, 1, 2, 3, 1<<23 - 1, 1 << 23, 1<<23 + 1, 1<<24 - 1, 1 << 24, 1<<24 + 1, 1<<24 + 2, 1<<31 - 128, 1<<31 - 1}
	var xs []float64
	for _, c := range append(cats, -1, -2, 4, 1<<23+2, 1<<24+3) {
		for _, v := range []float64{float64(c), float64(c) + 1, float64(c) - 0.5, float64(c) + 0.5} {
			xs = append(xs, walk64(v, 12)...)
			v32 := float32(v)
			for _, u := range []float32{math.Nextafter32(v32, float32(math.Inf(-1))), v32, math.Nextafter32(v32, float32(math.Inf(1)))} {
				xs = append(xs, walk64(float64(u), 3)...)
				m := float64(u)/2 + float64(math.Nextafter32(u, float32(math.Inf(1))))/2
				xs = append(xs, walk64(m, 3)...)
			}
		}
	}
	for _, z := range []float64{forest.ZeroMissingBound, -forest.ZeroMissingBound, -999, 0} {
		xs = append(xs, walk64(z, 20)...)
		lo, hi := Round32Range(float32(z))
		xs = append(xs, walk64(lo, 5)...)
		xs = append(xs, walk64(hi, 5)...)
	}
	xs = append(xs, math.NaN(), math.Inf(1), math.Inf(-1), math.MaxFloat64, 5e-324, -5e-324)
	checked := 0
	for _, m := range []forest.CategoryMatch{forest.MatchFloor, forest.MatchTruncate, forest.MatchExact} {
		for _, mv := range []float64{-999, 0} {
			f := &forest.Forest{Task: forest.Regression, Features: []string{"x"}, InputPrecision: forest.Float32,
				Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0}, CategoryMatch: m,
				HasMissingValue: true, MissingValue: mv}
			// a set split on x, whose right child is a zero_missing split on x
			f.Trees = []forest.Tree{{
				Feature: []int{0, -1, 0, -1, -1}, Threshold: []float64{0, 0, 0.5, 0, 0},
				Left: []int{1, -1, 3, -1, -1}, Right: []int{2, -1, 4, -1, -1},
				MissingLeft: []bool{false, false, true, false, false}, Value: []float64{0, 1, 0, 2, 3},
				Categories: [][]int32{cats, nil, nil, nil, nil}, ZeroMissing: []bool{false, false, true, false, false},
			}}
			require.NoError(t, f.Validate("set"))
			want, got := []float64{0}, []float64{0}
			for _, single := range []bool{false, true} {
				p, _, err := Compile(f, Options{SingleInputs: single, Skip: []string{"prune"}})
				require.NoError(t, err)
				require.Equal(t, !single, p.CategoryRound32)
				for _, x := range xs {
					if single {
						x = float64(float32(x))
					}
					f.Predict([]float64{x}, want)
					Eval(p, []float64{x}, got)
					if want[0] != got[0] {
						t.Fatalf("match %s, missing value %v, single %v: x=%v (%#x): interpreter %v, program %v\n%s", m, mv, single, x, math.Float64bits(x), want[0], got[0], p)
					}
					checked++
				}
			}
		}
	}
	t.Logf("%d inputs route alike", checked)
}

// TestMidpoints32 holds the float32 pass's record of what it wrote: a
// float32 model compiled for float64 inputs says Midpoints32 exactly when
// it has a numeric split and every threshold's float32 below is finite, and
// every such split then reads back as round32(x) <= t32 with t32 =
// Floor32(m); a float64 model, the float32-input form, a model of set
// splits only and one threshold below -MaxFloat32 do not say it.
func TestMidpoints32(t *testing.T) {
	rng := rand.New(rand.NewPCG(32, 0))
	set := 0
	for range 300 {
		f := randomForest(rng)
		for _, single := range []bool{false, true} {
			p, _, err := Compile(f, Options{SingleInputs: single})
			require.NoError(t, err)
			numeric, finite := false, true
			for _, tr := range Lower(f).Trees {
				for _, n := range tr.Nodes {
					if !n.IsLeaf() && !n.IsSetSplit() {
						numeric = true
						finite = finite && !math.IsInf(float64(Floor32(n.Threshold)), 0)
					}
				}
			}
			want := f.InputPrecision == forest.Float32 && !single && numeric && finite
			// pruning and folding may remove splits, never add them, so a
			// program that says it still has one numeric split
			if p.Midpoints32 != want && !(want && !p.Midpoints32 && noNumeric(p)) {
				t.Fatalf("input %s, single %v: Midpoints32 %v, want %v\n%s", f.InputPrecision, single, p.Midpoints32, want, p)
			}
			if p.Midpoints32 {
				set++
				for _, tr := range p.Trees {
					for _, n := range tr.Nodes {
						if n.IsLeaf() || n.IsSetSplit() {
							continue
						}
						t32 := Floor32(n.Threshold)
						for _, x := range walk64(float64(t32), 2) {
							for _, y := range []float64{x, float64(t32)/2 + float64(math.Nextafter32(t32, float32(math.Inf(1))))/2} {
								if got := n.Op == LE && y <= n.Threshold || n.Op == LT && y < n.Threshold; got != (float32(y) <= t32) {
									t.Fatalf("x=%v: x %v %v is %v, round32(x) <= %v is not", y, n.Op, n.Threshold, got, t32)
								}
							}
						}
					}
				}
			}
		}
	}
	require.Greater(t, set, 10, "random float32 models must exercise Midpoints32")

	f := &forest.Forest{Task: forest.Regression, Features: []string{"x"}, InputPrecision: forest.Float32,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0},
		Trees: []forest.Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{-1e39, 0, 0},
			Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: []bool{false, false, false}, Value: []float64{0, 1, 2}}}}
	require.NoError(t, f.Validate("below"))
	p, _, err := Compile(f, Options{})
	require.NoError(t, err)
	require.False(t, p.Midpoints32, "a threshold below -MaxFloat32 has no finite float32 below it")

	f.Trees[0].Threshold[0] = 0.1
	p, _, err = Compile(f, Options{})
	require.NoError(t, err)
	require.True(t, p.Midpoints32)
	back, err := Parse(p.String())
	require.NoError(t, err)
	require.True(t, back.Midpoints32, "the text form keeps it")
	p.Trees[0].Nodes[0].Threshold = 0.1 // no longer a midpoint
	require.ErrorContains(t, Check(p), "not the midpoint test of a finite float32")
}

func noNumeric(p *Program) bool {
	for _, tr := range p.Trees {
		for _, n := range tr.Nodes {
			if !n.IsLeaf() && !n.IsSetSplit() {
				return false
			}
		}
	}
	return true
}
