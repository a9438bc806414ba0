package compile

import "math"

// float32Compare removes float32 arithmetic from comparisons.
//
// A float32 model compares round32(x) <= t, with round32 IEEE 754
// round-to-nearest-even (IEEE 754-2019, 4.3.1) and t a float64. Let t32 be
// the largest float32 not above t (possibly -Inf) and u the next float32 up
// (+Inf standing for 2^128 past MaxFloat32). Then round32(x) <= t exactly
// when round32(x) <= t32, and:
//
//   - for float32 inputs (SingleInputs): x <= t32, as a float32 comparison;
//     when t32 is -Inf that is x < -MaxFloat32, keeping thresholds finite;
//   - for float64 inputs: x against m, the midpoint of t32 and u, which is
//     exact in float64. Below m, x rounds to t32 or lower; above, to u or
//     higher; at m, to whichever of the two has an even significand. So the
//     test is x <= m when t32's significand is even and x < m when odd.
//
// The missing tests are intervals and move the same way: for float64
// inputs the missing band [m, m] of a float32 model becomes Round32Range(m),
// every float64 that rounds to m (none when m is no float32, and then the
// band is dropped), and the zero bound z becomes the top of
// Round32Range(Floor32(z)); for float32 inputs the band shrinks to the
// float32 values inside it and the zero bound to Floor32(z). Set splits of
// a float32 model keep their categories: in the float64-input form they
// are marked CategoryRound32 (a target rounds the input to float32 before
// taking its category: the category edges of round32(x) are not those of
// x, and no shift of the lists would make them so); in the float32-input
// form the input is already the rounded value.
//
// A float64 model compiled for float32 inputs gets the same Single form,
// which is exact for every float32 input (narrowing the input is the
// target's choice, not this pass's).
func float32Compare(p *Program) {
	switch {
	case p.Compare == Round32 && !p.SingleInputs:
		numeric, finite := false, true
		for ti := range p.Trees {
			for i := range p.Trees[ti].Nodes {
				n := &p.Trees[ti].Nodes[i]
				switch {
				case n.IsSetSplit():
					p.CategoryRound32 = true
				case !n.IsLeaf():
					numeric = true
					finite = finite && !math.IsInf(float64(Floor32(n.Threshold)), 0)
					n.Op, n.Threshold = Midpoint32(n.Threshold)
				}
			}
		}
		p.Midpoints32 = numeric && finite
		if lo, hi, ok := band32(p); ok {
			p.MissingLo, _ = Round32Range(lo)
			_, p.MissingHi = Round32Range(hi)
		}
		_, p.ZeroBound = Round32Range(Floor32(p.ZeroBound))
		p.Compare = Double
	case p.SingleInputs && p.Compare != Single:
		for ti := range p.Trees {
			for i := range p.Trees[ti].Nodes {
				n := &p.Trees[ti].Nodes[i]
				if !n.IsLeaf() && !n.IsSetSplit() {
					n.Op, n.Threshold = Single32(n.Op, n.Threshold)
				}
			}
		}
		if lo, hi, ok := band32(p); ok {
			p.MissingLo, p.MissingHi = float64(lo), float64(hi)
		}
		p.ZeroBound = float64(Floor32(p.ZeroBound))
		p.CategoryRound32 = false // a float32 input is its own rounding
		p.Midpoints32 = false
		p.Compare = Single
	}
}

// band32 narrows the missing band to the float32 values inside it, which
// are all a rounded or float32 input can be; it drops the band (ok false)
// when it holds none.
func band32(p *Program) (lo, hi float32, ok bool) {
	if !p.HasMissingValue {
		return 0, 0, false
	}
	lo, hi = -Floor32(-p.MissingLo), Floor32(p.MissingHi)
	p.HasMissingValue = lo <= hi
	return lo, hi, p.HasMissingValue
}

// Round32Range is the closed interval of float64 values x with
// round32(x) == v (so both zeros when v is zero): its ends sit at or next
// to the midpoints between v and its float32 neighbours, on the side
// round-half-even sends to v; −Inf's starts at −Inf and +Inf's ends there.
func Round32Range(v float32) (lo, hi float64) {
	if math.IsInf(float64(v), -1) {
		_, m := Midpoint32(float64(v)) // x <= m rounds to −Inf: −Inf's significand is even
		return math.Inf(-1), m
	}
	op, m := Midpoint32(float64(v)) // round32(x) <= v  ⇔  x op m
	hi = m
	if op == LT {
		hi = math.Nextafter(m, math.Inf(-1))
	}
	below := math.Nextafter32(v, float32(math.Inf(-1)))
	if v == 0 {
		below = -math.SmallestNonzeroFloat32 // the float32 below both zeros
	}
	op, m = Midpoint32(float64(below)) // round32(x) < v  ⇔  x op m
	lo = m
	if op == LE {
		lo = math.Nextafter(m, math.Inf(1))
	}
	return lo, hi
}

// Floor32 is the largest float32 not above t (possibly -Inf).
func Floor32(t float64) float32 {
	f := float32(t)
	if float64(f) > t {
		f = math.Nextafter32(f, float32(math.Inf(-1)))
	}
	return f
}

// Midpoint32 gives the float64 comparison equivalent to round32(x) <= t for
// every float64 x that is not NaN: x op m.
func Midpoint32(t float64) (Op, float64) {
	t32 := Floor32(t)
	lo := float64(t32)
	if math.IsInf(lo, -1) {
		lo = -0x1p128
	}
	var hi float64
	if t32 == math.MaxFloat32 {
		hi = 0x1p128
	} else {
		hi = float64(math.Nextafter32(t32, float32(math.Inf(1))))
	}
	m := lo/2 + hi/2 // exact: both halves and their sum fit in float64
	if math.Float32bits(t32)&1 == 0 {
		return LE, m
	}
	return LT, m
}

// Single32 gives the float32 comparison equivalent to x op t for every
// float32 x that is not NaN: x op2 t2 with t2 a finite float32 value.
func Single32(op Op, t float64) (Op, float64) {
	var t32 float32
	if op == LE {
		t32 = Floor32(t) // x <= t  ⇔  x <= largest float32 <= t
	} else {
		t32 = Floor32(t) // x < t  ⇔  x <= largest float32 < t
		if float64(t32) == t {
			t32 = math.Nextafter32(t32, float32(math.Inf(-1)))
		}
	}
	if math.IsInf(float64(t32), -1) {
		return LT, -math.MaxFloat32 // x <= -Inf  ⇔  x < -MaxFloat32
	}
	return LE, float64(t32)
}
