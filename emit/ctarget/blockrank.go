package ctarget

import (
	"fmt"
	"math"
	"slices"
)

// Rank keys. Where a forest's thresholds are not all exact as floats (a
// LightGBM model's doubles), the block walk's keys and thresholds would
// be doubles and its nodes 16 bytes. Instead each feature's distinct
// thresholds T are sorted, a split stores its threshold's index i in T,
// and a row's key for the feature is its rank, the number of cuts below
// the value (at or below, where every split is a <): x > T[i] exactly when
// rank(x) > i, since T is strictly ascending. Keys and thresholds are then
// 16-bit integers, a node 6 or 8 bytes, and a row pays one binary search
// per feature (blockRankMaxCuts cuts at most) before the walk.

// blockRankMaxCuts is the most distinct thresholds a feature may have for
// rank keys: ranks fit 16 bits.
const blockRankMaxCuts = 65535

// blockRankKeys is the block walk's rank keys: per feature, its sorted
// distinct thresholds and the ranks of -inf and +inf (NaN's keys).
type blockRankKeys struct {
	cuts   [][]float64
	lo, hi []int
}

// blockRanks turns b's thresholds into indexes of each feature's sorted
// distinct thresholds, or returns nil (and leaves b alone) where a feature
// has more than blockRankMaxCuts of them.
func (g *gen) blockRanks(b *blockForest) *blockRankKeys {
	nf := len(g.p.Features)
	leafKey := g.blockLeafKey()
	seen := make([]map[float64]bool, nf)
	for i := range seen {
		seen[i] = map[float64]bool{}
	}
	for i, k := range b.key {
		if k != leafKey {
			seen[k/blockChains>>1][b.thr[i]] = true
		}
	}
	rk := &blockRankKeys{cuts: make([][]float64, nf), lo: make([]int, nf), hi: make([]int, nf)}
	for f, s := range seen {
		if len(s) > blockRankMaxCuts {
			return nil
		}
		for t := range s {
			rk.cuts[f] = append(rk.cuts[f], t)
		}
		slices.Sort(rk.cuts[f])
		rk.lo[f] = rankOf(rk.cuts[f], math.Inf(-1), b.ge)
		rk.hi[f] = rankOf(rk.cuts[f], math.Inf(1), b.ge)
	}
	for i, k := range b.key {
		if k == leafKey {
			b.thr[i] = 0 // the leaves' key is 0: 0 > 0 never holds
			continue
		}
		at, ok := slices.BinarySearch(rk.cuts[k/blockChains>>1], b.thr[i])
		if !ok {
			panic("BUG: ctarget: a threshold missing from its feature's cuts")
		}
		b.thr[i] = float64(at)
	}
	return rk
}

// rankOf is the number of cuts below v, or at or below it when ge.
func rankOf(cuts []float64, v float64, ge bool) int {
	n := 0
	for _, t := range cuts {
		if t < v || ge && t == v {
			n++
		}
	}
	return n
}

// blockRankTables writes each feature's cuts, where they start, and the
// ranks of -inf and +inf.
func (g *gen) blockRankTables(w *printer, rk *blockRankKeys) {
	var all []float64
	var at []int
	for _, c := range rk.cuts {
		at = append(at, len(all))
		all = append(all, c...)
	}
	at = append(at, len(all))
	if len(all) == 0 {
		all = append(all, 0) // no split at all: a table of one unused cut
	}
	g.bvArray(w, g.ft, "bk_cut", "block walk: per feature, its distinct thresholds in ascending order", len(all), func(i int) string { return g.lit(all[i]) })
	g.bvArray(w, "uint32_t", "bk_cut_at", "block walk: where each feature's cuts start in "+g.name+"_bk_cut, and the end", len(at), func(i int) string { return fmt.Sprintf("%du", at[i]) })
	g.bvArray(w, "uint16_t", "bk_lo", "block walk: per feature, the key of NaN going left (the rank of -inf)", len(rk.lo), func(i int) string { return fmt.Sprintf("%du", rk.lo[i]) })
	g.bvArray(w, "uint16_t", "bk_hi", "block walk: per feature, the key of NaN going right (the rank of +inf)", len(rk.hi), func(i int) string { return fmt.Sprintf("%du", rk.hi[i]) })
}

// blockRankSearch writes NAME_bk_rank, a binary search without branches on
// the data (a conditional move a level).
func (g *gen) blockRankSearch(w *printer, ge bool) {
	cmp := map[bool]string{false: "<", true: "<="}[ge]
	w.line("/* The number of the n cuts at t (ascending) %s v: a binary search whose", cmp)
	w.line(" * levels choose a pointer, not a branch. NaN gives 0 (its keys are set")
	w.line(" * apart). */")
	w.line("static uint16_t %s_bk_rank(const %s *t, uint32_t n, %s v)", g.name, g.ft, g.ft)
	w.line("{")
	w.line("\tconst %s *b = t;", g.ft)
	w.line("\tif (n == 0u) {")
	w.line("\t\treturn 0u;")
	w.line("\t}")
	w.line("\twhile (n > 1u) {")
	w.line("\t\tconst uint32_t half = n / 2u;")
	w.line("\t\tb = b[half] %s v ? b + half : b;", cmp)
	w.line("\t\tn -= half;")
	w.line("\t}")
	w.line("\treturn (uint16_t)((size_t)(b - t) + (size_t)(*b %s v));", cmp)
	w.line("}")
	w.line("")
}

// blockRankKeyLines writes the body of the key loop for rank keys: the
// rank of feature j's value, NaN's keys from the tables.
func (g *gen) blockRankKeyLines(w *printer) {
	n := g.name
	w.line("const %s v = xr[j];", g.ft)
	w.line("const uint16_t r = %s_bk_rank(%s_bk_cut + %s_bk_cut_at[j], %s_bk_cut_at[j + 1] - %s_bk_cut_at[j], v);", n, n, n, n, n)
	w.line("k[2 * j * %d] = v != v ? %s_bk_lo[j] : r;", blockChains, n)
	w.line("k[(2 * j + 1) * %d] = v != v ? %s_bk_hi[j] : r;", blockChains, n)
}
