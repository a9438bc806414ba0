package train

import (
	"math"
	"math/rand/v2"
	"slices"

	"github.com/sawmill-dev/sawmill/forest"
)

// table is the training data laid out for growing: one column per feature,
// and each feature's row order sorted by value, computed once and shared
// read-only by every worker.
type table struct {
	n, p  int
	k     int         // number of classes; 0 for regression
	cols  [][]float64 // cols[f][r]
	class []int32     // classification: class index per row
	y     []float64   // regression: target per row
	order [][]int32   // order[f]: rows sorted by cols[f], ties by row
	// edges[f] are feature f's bin edges and bins[f][r] row r's bin, with
	// Settings.MaxBins; both nil without (see bins.go).
	edges [][]float64
	bins  [][]int32
}

func newTable(d *Data) *table {
	n, p := d.Len(), len(d.Features)
	t := &table{n: n, p: p, cols: make([][]float64, p), order: make([][]int32, p)}
	for f := range p {
		c := make([]float64, n)
		for r := range n {
			c[r] = d.X[r*p+f]
		}
		t.cols[f] = c
		o := make([]int32, n)
		for r := range o {
			o[r] = int32(r)
		}
		slices.SortStableFunc(o, func(a, b int32) int { return cmpFloat(c[a], c[b]) })
		t.order[f] = o
	}
	if d.Task == forest.Classification {
		t.k = len(d.Classes)
		t.class = make([]int32, n)
		for r, y := range d.Y {
			t.class[r] = int32(y)
		}
	} else {
		t.y = d.Y
	}
	return t
}

// frame is a node waiting to be grown: its rows are lists[f][lo:hi] for
// every feature f.
type frame struct {
	lo, hi int
	depth  int
	parent int  // node id of the parent; -1 for the root
	right  bool // whether this is the parent's right child
}

// grower holds one worker's buffers, reused from tree to tree so that
// growing allocates nothing per node.
type grower struct {
	t *table
	s *resolved

	w     []int32 // bootstrap draws per row
	lists []int32 // p lists of the in-bag rows, each sorted by its feature
	m     int     // in-bag rows: length of each list
	tmp   []int32
	left  []bool // per row: goes to the left child of the node being split
	feats []int  // features, shuffled per node
	stack []frame

	tot, lc []float64 // class weights: node total, left side

	tree forest.Tree
}

func newGrower(t *table, s *resolved) *grower {
	k := max(t.k, 1)
	return &grower{
		t: t, s: s,
		w:     make([]int32, t.n),
		left:  make([]bool, t.n),
		feats: make([]int, t.p),
		tot:   make([]float64, k),
		lc:    make([]float64, k),
	}
}

// split is the best split found at a node.
type split struct {
	feature int
	pos     int // rows lists[feature][lo:lo+pos] go left
	lo, hi  float64
	score   float64
}

// grow grows one tree from rng and returns it. g.w keeps the tree's
// bootstrap counts afterwards.
func (g *grower) grow(rng *rand.Rand) forest.Tree {
	t, s := g.t, g.s
	n, p := t.n, t.p
	clear(g.w)
	for range s.draws {
		g.w[rng.IntN(n)]++
	}
	m := 0
	for _, c := range g.w {
		if c > 0 {
			m++
		}
	}
	g.m = m
	if cap(g.lists) < p*m {
		g.lists = make([]int32, p*m)
		g.tmp = make([]int32, m)
	}
	g.lists = g.lists[:p*m]
	for f := range p {
		dst := g.lists[f*m : (f+1)*m]
		j := 0
		for _, r := range t.order[f] {
			if g.w[r] > 0 {
				dst[j] = r
				j++
			}
		}
	}
	for i := range g.feats {
		g.feats[i] = i
	}

	k := max(t.k, 1)
	g.tree = forest.Tree{}
	tr := &g.tree
	g.stack = append(g.stack[:0], frame{lo: 0, hi: m, parent: -1})
	for len(g.stack) > 0 {
		fr := g.stack[len(g.stack)-1]
		g.stack = g.stack[:len(g.stack)-1]
		id := len(tr.Left)
		tr.Feature = append(tr.Feature, -1)
		tr.Threshold = append(tr.Threshold, 0)
		tr.Left = append(tr.Left, -1)
		tr.Right = append(tr.Right, -1)
		tr.MissingLeft = append(tr.MissingLeft, false)
		for range k {
			tr.Value = append(tr.Value, 0)
		}
		if fr.parent >= 0 {
			if fr.right {
				tr.Right[fr.parent] = id
			} else {
				tr.Left[fr.parent] = id
			}
		}

		weight, pure := g.nodeStats(fr.lo, fr.hi)
		if !pure && weight >= 2*s.minLeaf && (s.maxDepth == 0 || fr.depth < s.maxDepth) {
			if sp, ok := g.findSplit(rng, fr.lo, fr.hi, weight); ok {
				tr.Feature[id] = sp.feature
				tr.Threshold[id] = g.threshold(sp)
				g.partition(sp, fr.lo, fr.hi)
				mid := fr.lo + sp.pos
				// Right pushed first so that the left child is grown next:
				// node ids come out in preorder.
				g.stack = append(g.stack,
					frame{lo: mid, hi: fr.hi, depth: fr.depth + 1, parent: id, right: true},
					frame{lo: fr.lo, hi: mid, depth: fr.depth + 1, parent: id})
				continue
			}
		}
		g.setLeaf(tr.Value[id*k:(id+1)*k], fr.lo, fr.hi, weight)
	}
	return g.tree
}

// nodeStats sums the node's bootstrap weight (into g.tot per class for a
// classifier) and reports whether the node is pure.
func (g *grower) nodeStats(lo, hi int) (weight float64, pure bool) {
	t := g.t
	rows := g.lists[lo:hi] // feature 0's list: any list holds the node's rows
	if t.k > 0 {
		clear(g.tot)
		for _, r := range rows {
			g.tot[t.class[r]] += float64(g.w[r])
		}
		classes := 0
		for _, c := range g.tot {
			weight += c
			if c > 0 {
				classes++
			}
		}
		return weight, classes <= 1
	}
	y0 := t.y[rows[0]]
	pure = true
	for _, r := range rows {
		weight += float64(g.w[r])
		if t.y[r] != y0 {
			pure = false
		}
	}
	return weight, pure
}

// setLeaf writes the leaf vector: class shares of the node's draws, or their
// mean target.
func (g *grower) setLeaf(v []float64, lo, hi int, weight float64) {
	t := g.t
	if t.k > 0 {
		for c, x := range g.tot {
			v[c] = x / weight
		}
		return
	}
	sum := 0.0
	for _, r := range g.lists[lo:hi] {
		sum += float64(g.w[r]) * t.y[r]
	}
	v[0] = sum / weight
}

// findSplit draws features without replacement until mtry non-constant ones
// have been scanned, and returns the best split among them.
func (g *grower) findSplit(rng *rand.Rand, lo, hi int, weight float64) (split, bool) {
	t, m := g.t, g.m
	best := split{score: math.Inf(-1), feature: -1}
	scanned := 0
	for i := 0; i < t.p && scanned < g.s.mtry; i++ {
		j := i + rng.IntN(t.p-i)
		g.feats[i], g.feats[j] = g.feats[j], g.feats[i]
		f := g.feats[i]
		rows := g.lists[f*m+lo : f*m+hi]
		x := t.cols[f]
		if x[rows[0]] == x[rows[len(rows)-1]] || t.sameBin(f, rows[0], rows[len(rows)-1]) {
			continue // constant in this node, or in one bin
		}
		scanned++
		if t.k > 0 {
			g.scanClass(f, rows, weight, &best)
		} else {
			g.scanReg(f, rows, weight, &best)
		}
	}
	return best, best.feature >= 0
}

// scanClass looks for the split of rows (sorted by feature f) that
// maximises ΣL_c²/W_L + ΣR_c²/W_R, which minimises the weighted Gini impurity
// of the children. Weights are whole numbers, so the sums are exact.
func (g *grower) scanClass(f int, rows []int32, weight float64, best *split) {
	t := g.t
	x := t.cols[f]
	minLeaf := g.s.minLeaf
	lc := g.lc
	clear(lc)
	sqL, sqR := 0.0, 0.0
	for _, c := range g.tot {
		sqR += c * c
	}
	wl := 0.0
	for i := 0; i < len(rows)-1; i++ {
		r := rows[i]
		wr := float64(g.w[r])
		c := t.class[r]
		l := lc[c]
		rc := g.tot[c] - l
		sqL += wr * (2*l + wr)
		sqR += wr * (wr - 2*rc)
		lc[c] = l + wr
		wl += wr
		xv, xn := x[r], x[rows[i+1]]
		if xv == xn || wl < minLeaf || weight-wl < minLeaf || t.sameBin(f, r, rows[i+1]) {
			continue
		}
		if score := sqL/wl + sqR/(weight-wl); score > best.score {
			*best = split{feature: f, pos: i + 1, lo: xv, hi: xn, score: score}
		}
	}
}

// scanReg looks for the split that maximises S_L²/W_L + S_R²/W_R, which
// minimises the children's weighted sum of squared deviations.
func (g *grower) scanReg(f int, rows []int32, weight float64, best *split) {
	t := g.t
	x := t.cols[f]
	minLeaf := g.s.minLeaf
	total := 0.0
	for _, r := range rows {
		total += float64(g.w[r]) * t.y[r]
	}
	sl, wl := 0.0, 0.0
	for i := 0; i < len(rows)-1; i++ {
		r := rows[i]
		wr := float64(g.w[r])
		sl += wr * t.y[r]
		wl += wr
		xv, xn := x[r], x[rows[i+1]]
		if xv == xn || wl < minLeaf || weight-wl < minLeaf || t.sameBin(f, r, rows[i+1]) {
			continue
		}
		sr := total - sl
		if score := sl*sl/wl + sr*sr/(weight-wl); score > best.score {
			*best = split{feature: f, pos: i + 1, lo: xv, hi: xn, score: score}
		}
	}
}

// partition reorders every feature's list of the node so that the rows
// going left come first, keeping each side sorted.
func (g *grower) partition(sp split, lo, hi int) {
	m := g.m
	chosen := g.lists[sp.feature*m+lo : sp.feature*m+hi]
	for i, r := range chosen {
		g.left[r] = i < sp.pos
	}
	for f := range g.t.p {
		if f == sp.feature {
			continue // already in order: its left rows are a prefix
		}
		rows := g.lists[f*m+lo : f*m+hi]
		j, k := 0, 0
		for _, r := range rows {
			if g.left[r] {
				rows[j] = r
				j++
			} else {
				g.tmp[k] = r
				k++
			}
		}
		copy(rows[j:], g.tmp[:k])
	}
}

// midpoint is the threshold between neighbouring distinct values lo < hi:
// their midpoint, or lo when the midpoint rounds to hi (or falls outside
// [lo, hi)), so that lo <= t < hi and "x <= t" separates them.
func midpoint(lo, hi float64) float64 {
	t := (lo + hi) / 2
	if math.IsInf(lo+hi, 0) {
		t = lo/2 + hi/2
	}
	if !(t >= lo && t < hi) {
		t = lo
	}
	return t
}

// leafOf walks tree tr for row r of the table.
func leafOf(tr *forest.Tree, cols [][]float64, r int) int {
	i := 0
	for tr.Left[i] != -1 {
		if cols[tr.Feature[i]][r] <= tr.Threshold[i] {
			i = tr.Left[i]
		} else {
			i = tr.Right[i]
		}
	}
	return i
}

// leafOfPermuted walks tree tr for row r with feature f's value replaced by v.
func leafOfPermuted(tr *forest.Tree, cols [][]float64, r, f int, v float64) int {
	i := 0
	for tr.Left[i] != -1 {
		x := v
		if g := tr.Feature[i]; g != f {
			x = cols[g][r]
		}
		if x <= tr.Threshold[i] {
			i = tr.Left[i]
		} else {
			i = tr.Right[i]
		}
	}
	return i
}
