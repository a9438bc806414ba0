package train

import (
	"slices"
	"sort"
)

// Histogram splits (Settings.MaxBins). Each feature's training column is
// cut into at most MaxBins bins by quantile edges, as histogram-based
// boosting libraries do (common practice, e.g. LightGBM's max_bin): with
// the column sorted, the q-th of MaxBins−1 edges lies after the value at
// position ⌊q·n/MaxBins⌋, at the midpoint between that value and the next
// distinct one. A split may only fall on an edge, and its threshold is
// that edge, so every tree of the forest compares a feature with the same
// few values: the binned C layout then needs at most MaxBins−1 cuts per
// feature (uint8 bins for MaxBins <= 255). A column with at most MaxBins
// distinct values keeps every split the unbinned forest could make.

// binEdges returns the sorted distinct edges of column c for maxBins bins.
func binEdges(c []float64, maxBins int) []float64 {
	s := slices.Clone(c)
	slices.SortFunc(s, cmpFloat)
	n := len(s)
	var edges []float64
	for q := 1; q < maxBins; q++ {
		pos := q * n / maxBins
		if pos == 0 {
			continue
		}
		a := s[pos-1]
		j := sort.Search(n, func(i int) bool { return s[i] > a })
		if j == n {
			break // a is the largest value: no edge above it
		}
		e := midpoint(a, s[j])
		if len(edges) == 0 || e > edges[len(edges)-1] {
			edges = append(edges, e)
		}
	}
	return edges
}

// binColumns sets t.edges and t.bins: per feature its edges and per row
// its bin, the number of edges below the row's value.
func (t *table) binColumns(maxBins int) {
	t.edges = make([][]float64, t.p)
	t.bins = make([][]int32, t.p)
	for f := range t.p {
		e := binEdges(t.cols[f], maxBins)
		b := make([]int32, t.n)
		for r, x := range t.cols[f] {
			b[r] = int32(sort.SearchFloat64s(e, x)) // first edge >= x: edges below x
		}
		t.edges[f], t.bins[f] = e, b
	}
}

// threshold is the threshold of split sp: with bins, the edge between its
// two sides (the first edge at or above the left side's largest value),
// else the midpoint of the two values it separates.
func (g *grower) threshold(sp split) float64 {
	if g.t.edges == nil {
		return midpoint(sp.lo, sp.hi)
	}
	e := g.t.edges[sp.feature]
	return e[sort.SearchFloat64s(e, sp.lo)]
}

// sameBin reports whether rows a and b of feature f fall in one bin (with
// bins), so that no split may separate them.
func (t *table) sameBin(f int, a, b int32) bool {
	return t.bins != nil && t.bins[f][a] == t.bins[f][b]
}
