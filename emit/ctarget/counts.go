package ctarget

import (
	"fmt"
	"math"
	"math/big"
	"strings"
)

// Count leaves. A classification forest's leaf is a vector of class
// shares, and a forest grown by sawmill train or scikit-learn (bootstrap
// draws counted, no class weights) makes each share the double nearest
// c_j/n, with c_j the draws of class j in the leaf and n = c_0+...+c_{k-1}.
// Where every distinct leaf vector is such a fraction with n <= 65535, the
// table and binned layouts store the counts c_j as uint8_t or uint16_t
// instead of the 4- or 8-byte values, and the walk divides at run time:
// IEEE 754 division is correctly rounded (C99 Annex F.3, under the
// FLT_EVAL_METHOD the emitted C requires), so (double)c_j/(double)n is
// the stored double bit for bit. A float accumulator divides in float where
// that gives every leaf's float value, else in double and rounds the
// quotient to float, which is the float nearest the double leaf, as the
// interpreter's narrowing makes it. Every leaf is checked at compile time
// with the same arithmetic (Go's float64 and float32 operations are IEEE
// ones); one leaf that is not such a fraction keeps the stored values for
// the whole model.
type leafCounts struct {
	// rows holds per row of tableLayout.leafRows its counts.
	rows [][]uint32
	// bytes is the size of one count: 1 or 2.
	bytes int
	// floatDiv: the float accumulator divides in float.
	floatDiv bool
	// packed, with Options.Pack, holds how the counts are packed.
	packed *packedCounts
}

// maxLeafCount is the largest n a count leaf may have.
const maxLeafCount = 1<<16 - 1

// leafCountsOf returns the counts of tl's leaf rows, or nil when some row
// is not a vector of fractions with one denominator (or the model is not
// one whose every tree adds a class-share vector to every output, or the
// leaves are lossy scaled integers, intleaves.go).
func (g *gen) leafCountsOf(tl *tableLayout) *leafCounts {
	if g.o.LeafValues || g.il != nil || tl.hasOut || tl.mixed || tl.width < 2 || !g.p.IsClassifier() {
		return nil
	}
	lc := &leafCounts{rows: make([][]uint32, len(tl.leafRows.vecs)), floatDiv: g.at == "float"}
	most := uint32(0)
	// The counts come from the model's own values (a float build's rows
	// are them rounded to float, which holds too few bits to find c/n);
	// divides then checks them against the rows.
	for ti := range g.p.Trees {
		for ni, v := range g.leaves[ti] {
			if v == nil {
				continue
			}
			r := tl.leafRows.row(v)
			if lc.rows[r] != nil {
				continue
			}
			c := countsOf(g.p.Trees[ti].Nodes[ni].Value, g.f32)
			if c == nil {
				return nil
			}
			lc.rows[r] = c
			most = max(most, sum32(c))
		}
	}
	if g.at != "float" && !lc.divides(g, tl) {
		return nil
	}
	if lc.floatDiv && !lc.divides(g, tl) {
		lc.floatDiv = false
		if !lc.divides(g, tl) {
			return nil
		}
	}
	lc.bytes = intBytes(int(most))
	return lc
}

// divides reports whether the walk's division gives every row's values.
func (lc *leafCounts) divides(g *gen, tl *tableLayout) bool {
	for i, c := range lc.rows {
		for j := range c {
			if lc.share(g, c[j], sum32(c)) != tl.leafRows.vecs[i][j] {
				return false
			}
		}
	}
	return true
}

// share is c/n as the emitted walk computes it, in the accumulator's type.
func (lc *leafCounts) share(g *gen, c, n uint32) float64 {
	switch {
	case g.at != "float":
		return float64(c) / float64(n)
	case lc.floatDiv:
		return float64(float32(c) / float32(n))
	}
	return float64(float32(float64(c) / float64(n)))
}

// countsOf finds counts c_j with fl(c_j/n) = v_j, n their sum, by the
// simplest fraction in each value's rounding interval (as a double, or as
// a float when f32): their least common denominator, and a few of its
// multiples where a float's wider interval held a simpler fraction than
// the one the trainer divided. nil if none.
func countsOf(v []float64, f32 bool) []uint32 {
	n := int64(1)
	for _, x := range v {
		if !(x >= 0 && x <= 1) {
			return nil
		}
		q := simplestDenominator(x, f32)
		if q == 0 {
			return nil
		}
		n = n / gcd(n, q) * q
		if n > maxLeafCount {
			return nil
		}
	}
	for m := n; m <= maxLeafCount && m <= 64*n; m += n {
		if c := tryCounts(v, m, f32); c != nil {
			return c
		}
	}
	return nil
}

// tryCounts returns the counts round(v_j*n) if they sum to n and each
// divides back to v_j (in double, then rounded to float for a float
// accumulator; divides checks the walk's own arithmetic later).
func tryCounts(v []float64, n int64, f32 bool) []uint32 {
	c := make([]uint32, len(v))
	s := int64(0)
	for j, x := range v {
		k := math.Round(x * float64(n))
		c[j] = uint32(k)
		s += int64(k)
		q := float64(k) / float64(n)
		if f32 {
			q = float64(float32(q))
		}
		if q != x {
			return nil
		}
	}
	if s != n {
		return nil
	}
	return c
}

// simplestDenominator is the denominator of the simplest fraction in the
// interval of reals that round to x (as a double, or as a float when f32),
// 0 when it exceeds maxLeafCount.
func simplestDenominator(x float64, f32 bool) int64 {
	if x == 0 || x == 1 {
		return 1
	}
	var lo, hi float64
	if f32 {
		f := float32(x)
		lo = float64(math.Nextafter32(f, 0))
		hi = float64(math.Nextafter32(f, 2))
	} else {
		lo, hi = math.Nextafter(x, 0), math.Nextafter(x, 2)
	}
	a := new(big.Rat).SetFloat64(x)
	b := new(big.Rat).Set(a)
	// the midpoints to the neighbours bound the interval
	a.Add(a, new(big.Rat).SetFloat64(lo)).Quo(a, big.NewRat(2, 1))
	b.Add(b, new(big.Rat).SetFloat64(hi)).Quo(b, big.NewRat(2, 1))
	_, q := simplestIn(a, b, 0)
	return q
}

// simplestIn returns the fraction with the least denominator in [a, b]
// (0 <= a < b), by continued fractions; q is 0 past maxLeafCount or depth 64.
func simplestIn(a, b *big.Rat, depth int) (p, q int64) {
	if depth > 64 {
		return 0, 0
	}
	fl := new(big.Int).Quo(a.Num(), a.Denom()) // floor: a >= 0
	if depth > 0 && fl.Cmp(big.NewInt(maxLeafCount)) > 0 {
		return 0, 0 // fl is the parent's denominator at least
	}
	f := new(big.Rat).SetInt(fl)
	if a.Cmp(f) == 0 {
		return fl.Int64(), 1
	}
	f1 := new(big.Rat).Add(f, big.NewRat(1, 1))
	if f1.Cmp(b) <= 0 {
		return fl.Int64() + 1, 1
	}
	// a and b lie in (f, f+1): f + 1/y with y the simplest in [1/(b-f), 1/(a-f)]
	lo := new(big.Rat).Inv(new(big.Rat).Sub(b, f))
	hi := new(big.Rat).Inv(new(big.Rat).Sub(a, f))
	yp, yq := simplestIn(lo, hi, depth+1)
	if yq == 0 || yp > maxLeafCount {
		return 0, 0
	}
	// f + yq/yp
	return fl.Int64()*yp + yq, yp
}

func gcd(a, b int64) int64 {
	for b != 0 {
		a, b = b, a%b
	}
	return a
}

func sum32(c []uint32) uint32 {
	s := uint32(0)
	for _, x := range c {
		s += x
	}
	return s
}

// addCounts adds the leaf lane l reached, a row of class counts, dividing
// each by their sum (see leafCounts).
func (t *tableWriter) addCounts(l string) {
	g, w, lc := t.g, t.w, t.tl.counts
	w.line("{")
	w.in()
	cnt := "cnt[j]"
	if lc.packed != nil {
		t.packedCountReads(t.row(l))
		cnt = fmt.Sprintf("%s_field(%s_leaf, cpos + (uint32_t)j * cw, cw)", g.name, g.name)
	} else {
		w.line("const %s *const cnt = &%s_leaf[(uint32_t)%s * %s_NUM_OUTPUTS];", uintType(lc.bytes), g.name, t.row(l), g.upper)
	}
	w.line("uint32_t draws = 0u;")
	w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
	w.line("\tdraws += %s;", cnt)
	w.line("}")
	w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
	var share string
	switch {
	case g.at != "float":
		share = "(double)cnt[j] / (double)draws"
	case lc.floatDiv:
		share = "(float)cnt[j] / (float)draws"
	default:
		share = "(float)((double)cnt[j] / (double)draws) /* the float nearest the double share */"
	}
	share = strings.ReplaceAll(share, "cnt[j]", cnt)
	w.line("\t%s", t.addTo(t.accOf(l)+"[j]", share))
	w.line("}")
	w.out()
	w.line("}")
}
