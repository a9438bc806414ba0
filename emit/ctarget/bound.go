package ctarget

import (
	"fmt"
	"math"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// ErrorBound bounds |C output - interpreter output| for every row, 0 when
// the emitted code is bit-exact. In float mode the interpreter is understood
// on the inputs rounded to float, which is what the float API receives.
//
// Double mode: comparisons, additions and the division are the
// interpreter's own IEEE operations, so without a transform the outputs are
// identical. A transform calls the C library's exp where the interpreter
// calls Go's math.Exp; both are within 1 ulp of e^z (glibc's documented
// bound; Go's math.Exp "error < 1 ulp"), so the two results are within 2 ulp,
// a relative 2^-51. For the logistic, out = 1/(1+e) or e/(1+e) moves by at
// most that relative error of e, plus one rounding of 1+e and of the
// division each (2^-53 each, out being at most 1): under 2^-50. For softmax,
// out_j = e_j/s with s the sum of K terms: the relative error of e_j, of s
// (2^-51 from its terms plus K roundings of 2^-53) and of the division add
// up to under (2K+8)·2^-52. Class labels must still agree except where the
// top two outputs are within twice the bound.
//
// Float mode, with u = 2^-24 (half an ulp of float, IEEE 754 round to
// nearest) and gamma(n) = n·u/(1-n·u), the bound on n rounding errors in
// recursive summation (Higham, Accuracy and Stability of Numerical
// Algorithms, 2nd ed., section 4.2): leaves and base scores are rounded to
// float once each and the T+1 terms are summed in float, so with M the sum
// over trees of each tree's largest |leaf| and b the largest |base|,
//
//	sum:     |z~ - z| <= gamma(T+2)·(M + b)
//	average: |z~ - z| <= gamma(T+3)·(M/T + b)   (the division and the base
//	                                            addition round once more)
//
// plus (2T+4)·2^-150 for roundings below float's normal range. The
// logistic's slope is at most 1/4, so its output moves by at most a
// quarter of that, plus 8u for expf (2 ulp) and two roundings; a softmax
// output moves by at most 2·p(1-p)·max|dz| <= half of it, plus (K+12)u for
// the K expfs, the sum and the division. The result is doubled, for the
// second-order terms and the interpreter's own float64 rounding.
//
// Float32 accumulation (either mode): every operation is the interpreter's
// own float operation in its order, and expf is the C library's, which the
// interpreter's forest.Expf ports bit for bit from glibc; so the bound is 0
// with glibc. Another C library's expf may differ by an ulp or two (its own
// documented accuracy); the header states what that moves.
//
// Version 2 in double mode: the scale is one multiplication and normalize
// is additions and divisions, both exact; logistic_each is bounded as the
// logistic; exp is within 2 ulp of the interpreter's e^z, a relative 2^-51,
// so within 2^-51·e^zmax with zmax the largest |z| the model can reach
// (|scale| times the largest |base| plus each tree's largest |leaf|).
func ErrorBound(p *compile.Program, float bool) float64 {
	k := float64(p.NumOutputs)
	if p.Float32Accumulate() {
		return 0
	}
	if !float {
		switch p.Transform {
		case forest.Logistic, forest.LogisticEach:
			return 0x1p-50
		case forest.Softmax:
			return (2*k + 8) * 0x1p-52
		case forest.Exp:
			return 0x1p-51 * math.Exp(maxScore(p))
		}
		return 0
	}
	const u = 0x1p-24
	gamma := func(n float64) float64 { return n * u / (1 - n*u) }
	m, b := p.Magnitudes()
	T := float64(len(p.Trees))
	// With trees of one output, output j sums fewer trees, T_j; the bound
	// below takes T for the count of roundings and the smallest T_j for
	// the average's divisor.
	tMin := T
	for j := 0; j < p.NumOutputs; j++ {
		tMin = min(tMin, float64(max(p.TreesAddingTo(j), 1)))
	}
	var e float64
	if p.Combine == forest.Sum {
		e = gamma(T+2) * (m + b)
	} else {
		e = gamma(T+3) * (m/tMin + b)
	}
	// Below float's normal range a rounding errs by up to half its
	// smallest subnormal, 2^-150, whatever the value (Higham's model with
	// underflow, fl(x) = x(1+d) + e, section 2.1): once per leaf and base
	// score, per addition and for the division.
	e += (2*T + 4) * 0x1p-150
	switch p.Transform {
	case forest.Logistic, forest.LogisticEach:
		e = e/4 + 8*u
	case forest.Softmax:
		e = e/2 + (k+12)*u
	}
	return 2 * e
}

// FitsFloat reports whether float C can score p without overflow: every
// leaf and base score, and the largest sum the accumulator can reach (the
// base plus each tree's largest |leaf|), within float range. Emit rejects
// only leaves and base scores out of range; a sum past the range would give
// an infinity where double C gives a number.
//
// Under float32 accumulation the interpreter itself adds in float, so float
// C is exact and nothing is checked; otherwise floatBounded must hold too.
func FitsFloat(p *compile.Program) error {
	if p.Float32Accumulate() {
		return nil
	}
	if err := floatBounded(p); err != nil {
		return err
	}
	total, _ := p.Magnitudes()
	for _, v := range p.BaseScore {
		total = math.Max(total, total+math.Abs(v))
	}
	if total > math.MaxFloat32 {
		return fmt.Errorf("the outputs can reach %g, beyond float range (%g)\nhint: emit double C", total, math.MaxFloat32)
	}
	return nil
}

// maxScore bounds |z|, the joined and scaled score, over every row: |scale|
// times (the largest |base| plus each tree's largest |leaf|).
func maxScore(p *compile.Program) float64 {
	m, b := p.Magnitudes()
	return math.Abs(p.Scale()) * (m + b)
}

// floatBounded reports whether float mode can score p, a model that
// accumulates in float64, within a bound ErrorBound derives: not with the
// exp or normalize transforms or a transform scale, whose float errors the
// bound does not cover.
func floatBounded(p *compile.Program) error {
	switch {
	case p.Transform == forest.Exp, p.Transform == forest.Normalize:
		return fmt.Errorf("output transform %s of a model that accumulates in float64 has no error bound in float arithmetic\nhint: emit double C", p.Transform)
	case p.Scale() != 1:
		return fmt.Errorf("transform scale %v of a model that accumulates in float64 has no error bound in float arithmetic\nhint: emit double C", p.Scale())
	}
	return nil
}
