package ctarget

import (
	"fmt"
	"math"
	"math/big"
	"strconv"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// Integer leaves (Options.IntLeaves), a lossy mode: every leaf value l
// becomes the integer q = round(l * 2^shift), stored as int16_t or int32_t,
// and NAME_predict_scaled adds the q of the leaves a row reaches in an
// integer accumulator, int32_t when the largest sum the model can reach
// fits it, else int64_t. NAME_predict turns the sums back into the model's
// arithmetic, z_j = base_j + S_j / 2^shift (a sum) or S_j / 2^shift / T_j +
// base_j (an average), then scales and transforms as the exact build does.
//
// The scale is a power of two, the largest for which every |q| fits the
// leaf type: l * 2^shift and S / 2^shift are then exact in binary floating
// point (no rounding enters but the leaf's own to an integer), and the
// range is used to at least half. One scale serves every output, so that
// the scaled sums of the outputs compare with each other as the outputs
// do (the class label from integers).
//
// The bound. Write e_t = max over the leaves of tree t of |q/2^shift - l|
// (each <= 2^-shift / 2, by rounding to nearest); then for output j,
//
//	sum:      |z~_j - z_j| <= E_j = sum over the trees adding to j of e_t
//	average:  |z~_j - z_j| <= E_j / T_j
//
// in real arithmetic; the transform scale multiplies it by |s|. Through the
// transform: the logistic's slope is at most 1/4; the softmax moves each
// output by at most 1/2 of the largest change of a logit (its Jacobian
// J_ij = p_i(d_ij - p_j) has row sums of absolute values p_i(1-p_i) +
// p_i(1-p_i) = 2 p_i(1-p_i) <= 1/2, the max-norm Lipschitz constant, by the
// mean value theorem along the segment); exp moves by e^zmax (e^E - 1),
// with zmax the largest z the model reaches (maxScore). Normalize has no
// bound (its divisor can be as small as a leaf's rounding) and is refused.
// On top of the real-arithmetic bound comes floating-point rounding: the
// interpreter's own recursive sum of T+1 terms and the few operations of
// the scaled build, at most 2 gamma(T+4) (M + b) with M the sum of each
// tree's largest |leaf|, b the largest |base| and gamma(n) = n u/(1-n u)
// (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., section
// 4.2), u = 2^-53 in double, 2^-24 in float; through the transform as
// above, plus ErrorBound's allowance for the C library's exp.
type intLeaves struct {
	bits  int     // 16 or 32: the leaf type
	shift int     // the scale is 2^shift
	scale float64 // 2^shift
	acc   string  // int32_t or int64_t: the sums' type
	// maxSum is the largest |S_j| the model can reach: the sum over trees
	// of each tree's largest |q|.
	maxSum int64
	// bound is per output the largest |C output - interpreter output|.
	bound []float64
	// label is how NAME_predict_class decides on the sums: "" (from the
	// outputs, in floating point), "threshold" (S_0 > cut) or "argmax".
	label string
	cut   int64
}

// IntLeafBits are the leaf widths Options.IntLeaves takes.
var IntLeafBits = []int{16, 32}

// newIntLeaves chooses the scale and the accumulator for g's leaves and
// derives the bound.
func (g *gen) newIntLeaves(bits int) (*intLeaves, error) {
	p := g.p
	if bits != 16 && bits != 32 {
		return nil, fmt.Errorf("integer leaves of %d bits: want 16 or 32", bits)
	}
	if p.Transform == forest.Normalize {
		return nil, &emit.Unsupported{Target: Name, Construct: "integer leaves under the normalize transform, which divides by a sum as small as a leaf's rounding error: no error bound",
			Hint: "emit without --int-leaves"}
	}
	il := &intLeaves{bits: bits}
	limit := float64(int64(1)<<(bits-1) - 1)
	biggest := 0.0
	g.eachLeaf(func(_, _ int, v float64) { biggest = math.Max(biggest, math.Abs(v)) })
	if math.IsInf(biggest, 0) || math.IsNaN(biggest) {
		return nil, fmt.Errorf("integer leaves: a leaf value is %v", biggest)
	}
	lim := maxShift
	if g.at == "float" {
		lim = maxShiftFloat
	}
	il.shift = scaleShift(biggest, limit, lim)
	il.scale = math.Ldexp(1, il.shift)
	if err := il.sums(g); err != nil {
		return nil, err
	}
	il.bound = il.derive(g)
	for j, b := range il.bound {
		if math.IsInf(b, 0) || math.IsNaN(b) {
			return nil, &emit.Unsupported{Target: Name, Construct: fmt.Sprintf("integer leaves here: output %d has no finite error bound (%v)", j, b),
				Hint: "emit without --int-leaves"}
		}
	}
	il.chooseLabel(g)
	il.dequantize(g)
	return il, nil
}

// dequantize replaces every leaf value of g by the value its integer
// stands for, q/2^shift (exact), once the bound is derived from the
// originals: leaves that round to the same integers are then one row of
// the leaf tables, and leafLit gives back q.
func (il *intLeaves) dequantize(g *gen) {
	for ti := range g.leaves {
		for ni, vec := range g.leaves[ti] {
			if vec == nil {
				continue
			}
			d := make([]float64, len(vec))
			for c, v := range vec {
				d[c] = math.Ldexp(float64(il.q(v)), -il.shift)
			}
			g.leaves[ti][ni] = d
		}
	}
}

// maxShift and maxShiftFloat bound the scale's exponent: 2^-1000 to
// 2^1000 are normal doubles, 2^-120 to 2^120 normal floats.
const (
	maxShift      = 1000
	maxShiftFloat = 120
)

// scaleShift is the largest k such that round(v * 2^k) stays within limit
// for every |v| <= biggest (0 when every leaf is 0).
func scaleShift(biggest, limit float64, maxShift int) int {
	if biggest == 0 {
		return 0
	}
	_, e := math.Frexp(limit / biggest)
	k := e
	for math.Abs(math.RoundToEven(math.Ldexp(biggest, k))) > limit {
		k--
	}
	// 2^k stays a normal float both ways, so that the scale is a float
	// literal and dividing by it is exact.
	return min(max(k, -maxShift), maxShift)
}

// eachLeaf calls fn with every leaf value as the target computes with it,
// with its tree and the output it adds to.
func (g *gen) eachLeaf(fn func(tree, output int, v float64)) {
	for ti := range g.p.Trees {
		for _, vec := range g.leaves[ti] {
			for c, v := range vec {
				j := c
				if g.scalarTree(ti) {
					j = g.p.Trees[ti].Output
				}
				fn(ti, j, v)
			}
		}
	}
}

// q is leaf value v scaled and rounded to an integer (ties to even).
func (il *intLeaves) q(v float64) int64 {
	return int64(math.RoundToEven(math.Ldexp(v, il.shift)))
}

// sums proves the accumulator wide enough: per output, the sum over the
// trees adding to it of each tree's largest |q|.
func (il *intLeaves) sums(g *gen) error {
	p := g.p
	per := make([][]int64, len(p.Trees)) // per tree, per output, largest |q|
	for ti := range per {
		per[ti] = make([]int64, p.NumOutputs)
	}
	limit := int64(1)<<(il.bits-1) - 1
	var wide error
	g.eachLeaf(func(ti, j int, v float64) {
		q := il.q(v)
		per[ti][j] = max(per[ti][j], q, -q)
		if (q > limit || q < -limit) && wide == nil {
			wide = fmt.Errorf("integer leaves: tree %d: leaf value %v does not fit int%d_t at the smallest scale", p.Trees[ti].Source, v, il.bits)
		}
	})
	if wide != nil {
		return wide
	}
	for j := 0; j < p.NumOutputs; j++ {
		var s int64
		for ti := range per {
			s += per[ti][j] // at most 2^31 per tree: no overflow below 2^32 trees
		}
		il.maxSum = max(il.maxSum, s)
	}
	il.acc = "int32_t"
	switch {
	case il.maxSum > 1<<53:
		return fmt.Errorf("integer leaves: the scaled sums can reach %d, beyond 2^53, which a double holds exactly\nhint: use --int-leaves 16", il.maxSum)
	case il.maxSum > math.MaxInt32-1:
		il.acc = "int64_t"
	}
	return nil
}

// treeErrors is per tree and output the largest |q/2^shift - l| over the
// tree's leaves, computed exactly.
func (il *intLeaves) treeErrors(g *gen) [][]float64 {
	p := g.p
	e := make([][]float64, len(p.Trees))
	for ti := range e {
		e[ti] = make([]float64, p.NumOutputs)
	}
	g.eachLeaf(func(ti, j int, v float64) {
		d := new(big.Float).SetPrec(2200).SetFloat64(math.Ldexp(float64(il.q(v)), -il.shift))
		d.Sub(d, new(big.Float).SetFloat64(v)).Abs(d)
		f, _ := d.Float64()
		if new(big.Float).SetFloat64(f).Cmp(d) < 0 {
			f = math.Nextafter(f, math.Inf(1)) // round the bound up
		}
		e[ti][j] = math.Max(e[ti][j], f)
	})
	return e
}

// derive is the bound per output (see intLeaves).
func (il *intLeaves) derive(g *gen) []float64 {
	p := g.p
	e := il.treeErrors(g)
	u := 0x1p-53
	if g.at == "float" {
		u = 0x1p-24
	}
	m, b := p.Magnitudes()
	T := float64(len(p.Trees))
	n := T + 4
	slack := 2 * n * u / (1 - n*u) * (m + b)
	rawZ := make([]float64, p.NumOutputs)
	for j := range rawZ {
		for ti := range e {
			rawZ[j] += e[ti][j]
		}
		if p.Combine == forest.Average {
			rawZ[j] /= float64(max(p.TreesAddingTo(j), 1))
		}
		rawZ[j] = (rawZ[j] + slack) * math.Abs(p.Scale())
	}
	out := make([]float64, p.NumOutputs)
	top := 0.0
	for _, z := range rawZ {
		top = math.Max(top, z)
	}
	extra := ErrorBound(p, g.o.Float)
	if g.f32 {
		extra = 2 * float64(p.NumOutputs+12) * 0x1p-24
	}
	for j, z := range rawZ {
		switch p.Transform {
		case forest.Logistic, forest.LogisticEach:
			out[j] = z / 4
		case forest.Softmax:
			out[j] = top / 2
		case forest.Exp:
			// e^z moves by e^z |e^d - 1| <= e^ztop (e^E - 1), and the C
			// library's exp errs by 2 ulp, a relative 2^-51 (ErrorBound).
			top := math.Exp(zTop(g, j))
			out[j] = top*math.Expm1(z) + 0x1p-51*top*math.Exp(z)
			extra = 0
		default:
			out[j] = z
		}
		out[j] = out[j]*(1+0x1p-20) + extra // the bound's own roundings, upward
		if p.Transform == forest.Logistic || p.Transform == forest.LogisticEach || p.Transform == forest.Softmax {
			out[j] = math.Min(out[j], 1) // both outputs lie in [0, 1]
		}
	}
	return out
}

// zTop is the largest z_j any row reaches, before the transform: the base
// plus each tree's largest leaf for output j (divided by T_j for an
// average), times the scale, or the smallest such sum for a negative scale.
func zTop(g *gen, j int) float64 {
	p := g.p
	hi := make([]float64, len(p.Trees))
	lo := make([]float64, len(p.Trees))
	for ti := range hi {
		hi[ti], lo[ti] = math.Inf(-1), math.Inf(1)
	}
	g.eachLeaf(func(ti, out int, v float64) {
		if out == j {
			hi[ti], lo[ti] = math.Max(hi[ti], v), math.Min(lo[ti], v)
		}
	})
	var sHi, sLo float64
	for ti := range hi {
		if !math.IsInf(hi[ti], -1) {
			sHi, sLo = sHi+hi[ti], sLo+lo[ti]
		}
	}
	if p.Combine == forest.Average {
		n := float64(max(p.TreesAddingTo(j), 1))
		sHi, sLo = sHi/n, sLo/n
	}
	sHi, sLo = sHi+g.base[j], sLo+g.base[j]
	// (1+2^-40) covers the sum's own roundings, and more.
	if s := p.Scale(); s < 0 {
		return s * sLo * (1 + 0x1p-40)
	}
	return p.Scale() * sHi * (1 + 0x1p-40)
}

// chooseLabel decides whether NAME_predict_class can decide on the sums
// alone: one output with a monotone transform (a threshold on S_0), or
// several that share the base score and the divisor, with a transform that
// keeps their order (argmax of the S_j).
func (il *intLeaves) chooseLabel(g *gen) {
	p := g.p
	if !p.IsClassifier() || p.Scale() <= 0 || p.Transform == forest.Exp {
		return
	}
	if p.NumOutputs == 1 {
		if cut, ok := il.thresholdCut(g); ok {
			il.label, il.cut = "threshold", cut
		}
		return
	}
	for j := 1; j < p.NumOutputs; j++ {
		if g.base[j] != g.base[0] || p.TreesAddingTo(j) != p.TreesAddingTo(0) {
			return
		}
	}
	il.label = "argmax"
}

// thresholdCut is the integer c with S_0 > c exactly when the output is
// above 0.5 in real arithmetic: z = base + S/2^shift (or S/2^shift/T +
// base) against theta = 0 under the logistic, 0.5/s without a transform.
func (il *intLeaves) thresholdCut(g *gen) (int64, bool) {
	p := g.p
	theta := new(big.Rat)
	switch p.Transform {
	case forest.Logistic, forest.LogisticEach:
	case forest.NoTransform:
		theta.SetFrac64(1, 2)
		theta.Quo(theta, new(big.Rat).SetFloat64(p.Scale()))
	default:
		return 0, false
	}
	c := theta.Sub(theta, new(big.Rat).SetFloat64(g.base[0]))
	c.Mul(c, new(big.Rat).SetFloat64(il.scale))
	if p.Combine == forest.Average {
		c.Mul(c, new(big.Rat).SetInt64(int64(max(p.TreesAddingTo(0), 1))))
	}
	// floor(c), clamped to just outside the sums' range.
	fl := new(big.Int).Div(c.Num(), c.Denom()) // Euclidean: floor for a positive denominator
	lim := big.NewInt(il.maxSum + 1)
	if fl.Cmp(lim) > 0 {
		fl = lim
	}
	if fl.Cmp(new(big.Int).Neg(lim)) < 0 {
		fl.Neg(lim)
	}
	return fl.Int64(), true
}

// leafType is the C type of a stored leaf.
func (il *intLeaves) leafType() string { return fmt.Sprintf("int%d_t", il.bits) }

// leafLit is leaf value v as its scaled integer.
func (il *intLeaves) leafLit(v float64) string { return strconv.FormatInt(il.q(v), 10) }

// sumLit is an integer constant of the sums' type.
func (il *intLeaves) sumLit(v int64) string {
	if il.acc == "int64_t" {
		return fmt.Sprintf("INT64_C(%d)", v)
	}
	if v == math.MinInt32 {
		return "INT32_MIN"
	}
	return strconv.FormatInt(v, 10)
}

// IntLeafBounds returns, per output, the bound on |C output - interpreter
// output| that Emit derives for p under o (o.IntLeaves set), and the scale
// 2^shift of the leaves.
func IntLeafBounds(p *compile.Program, o Options) (bounds []float64, scale float64, err error) {
	if o.IntLeaves == 0 {
		return nil, 1, fmt.Errorf("BUG: IntLeafBounds without IntLeaves")
	}
	g, err := newGen(p, o)
	if err != nil {
		return nil, 0, err
	}
	return g.il.bound, g.il.scale, nil
}
