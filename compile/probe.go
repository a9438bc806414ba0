package compile

import (
	"math"

	"github.com/sawmill-dev/sawmill/forest"
)

// LeafRows returns rows that reach the leaves of f: for each reachable leaf
// of each tree, in tree and preorder order, one row whose values lie inside
// the leaf's box of path conditions (the same facts the prune pass uses) and
// that the interpreter indeed routes to that leaf. Features the path does
// not test are 0. At most limit rows are returned (limit <= 0: all).
//
// The value chosen for a feature is the path's upper bound when the path
// has one it includes (so rows sit exactly on thresholds), else just inside
// the lower bound, else 0; NaN when only a missing value reaches the leaf.
// For float32 models the values are float32 numbers.
func LeafRows(f *forest.Forest, limit int) [][]float64 {
	p := Lower(f)
	f32 := p.Compare == Round32
	var rows [][]float64
	for ti := range p.Trees {
		t := &p.Trees[ti]
		src := &f.Trees[t.Source]
		st := make([]span, len(p.Features))
		for j := range st {
			st[j] = fullSpan()
		}
		both := func(*Node) (bool, bool) { return true, true }
		walkPaths(t.Nodes, st, rulesOf(p), both, func(leaf int32, box []span) bool {
			x := make([]float64, len(box))
			for j, s := range box {
				x[j] = s.pick(f32)
			}
			if f.LeafIndex(src, x) == int(t.Nodes[leaf].ID) {
				rows = append(rows, x)
			}
			return limit <= 0 || len(rows) < limit
		})
		if limit > 0 && len(rows) >= limit {
			break
		}
	}
	return rows
}

// pick chooses a value inside s, as LeafRows documents.
func (s span) pick(f32 bool) float64 {
	unbounded := math.IsInf(s.lo, -1) && math.IsInf(s.hi, 1)
	if unbounded {
		return 0
	}
	ok := func(v float64) bool {
		return !math.IsNaN(v) && (v > s.lo || v == s.lo && !s.loOpen) && (v < s.hi || v == s.hi && !s.hiOpen)
	}
	var cands []float64
	if !math.IsInf(s.hi, 1) {
		h := s.hi
		cands = append(cands, h, math.Nextafter(h, math.Inf(-1)))
		if f32 {
			h32 := float64(Floor32(h))
			cands = append([]float64{h32, float64(math.Nextafter32(float32(h32), float32(math.Inf(-1))))}, cands...)
		}
	}
	if !math.IsInf(s.lo, -1) {
		l := s.lo
		cands = append(cands, l, math.Nextafter(l, math.Inf(1)), l+1)
		if f32 {
			up := float32(l)
			if float64(up) <= l {
				up = math.Nextafter32(up, float32(math.Inf(1)))
			}
			cands = append(cands, float64(up))
		}
	}
	cands = append(cands, 0)
	for _, v := range cands {
		if f32 && float64(float32(v)) != v {
			continue
		}
		if ok(v) {
			return v
		}
	}
	return math.NaN()
}

// ThresholdRows returns, for every reachable split of f, rows that put its
// feature at the threshold, at its float64 neighbours, at its float32
// rounding and that value's float32 neighbours, and at a missing value (at a
// set split: at the edges of its first categories, and at negative values;
// at a zero_missing split: at the edges of the zero band; with a
// missing_value: at its edges); the other features are 0. At most limit rows (limit <= 0: all).
func ThresholdRows(f *forest.Forest, limit int) [][]float64 {
	var rows [][]float64
	nf := len(f.Features)
	for ti := range f.Trees {
		t := &f.Trees[ti]
		for _, i := range reachableNodes(t) {
			if t.IsLeaf(i) {
				continue
			}
			vals := append(edges(t.Threshold[i]), math.NaN())
			if t.IsSetSplit(i) {
				vals = []float64{math.NaN(), -0.5, -1, math.Copysign(0, -1)}
				for j, c := range t.Categories[i] {
					if j == 4 {
						break
					}
					vals = append(vals, edges(float64(c))...)
					vals = append(vals, float64(c)+0.5, math.Nextafter(float64(c)+1, 0))
				}
			}
			if t.ZeroMissing != nil && t.ZeroMissing[i] {
				vals = append(vals, edges(forest.ZeroMissingBound)...)
				vals = append(vals, edges(-forest.ZeroMissingBound)...)
			}
			if f.HasMissingValue {
				vals = append(vals, edges(f.MissingValue)...)
			}
			for _, v := range vals {
				x := make([]float64, nf)
				x[t.Feature[i]] = v
				rows = append(rows, x)
				if limit > 0 && len(rows) >= limit {
					return rows
				}
			}
		}
	}
	return rows
}

// edges is v, its float64 neighbours, its float32 rounding and that
// value's float32 neighbours.
func edges(v float64) []float64 {
	v32 := float32(v)
	return []float64{v, math.Nextafter(v, math.Inf(-1)), math.Nextafter(v, math.Inf(1)),
		float64(v32), float64(math.Nextafter32(v32, float32(math.Inf(-1)))),
		float64(math.Nextafter32(v32, float32(math.Inf(1))))}
}

// reachableNodes lists the nodes reachable from the root in preorder; the
// format allows unreachable node slots, which hold no meaning.
func reachableNodes(t *forest.Tree) []int {
	var out []int
	stack := []int{0}
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		out = append(out, i)
		if !t.IsLeaf(i) {
			stack = append(stack, t.Right[i], t.Left[i])
		}
	}
	return out
}

// Coverage reports which leaves and branch directions rows exercise.
type Coverage struct {
	Leaves, LeavesHit     int
	Branches, BranchesHit int // two directions per reachable split
}

// Cover measures the coverage of rows over f's reachable nodes.
func Cover(f *forest.Forest, rows [][]float64) Coverage {
	var c Coverage
	for ti := range f.Trees {
		t := &f.Trees[ti]
		hit := make([]bool, t.NumNodes())
		for _, x := range rows {
			i := 0
			hit[0] = true
			for !t.IsLeaf(i) {
				i = step(f, t, x, i)
				hit[i] = true
			}
		}
		for _, i := range reachableNodes(t) {
			if t.IsLeaf(i) {
				c.Leaves++
				if hit[i] {
					c.LeavesHit++
				}
				continue
			}
			c.Branches += 2
			for _, ch := range [2]int{t.Left[i], t.Right[i]} {
				if hit[ch] {
					c.BranchesHit++
				}
			}
		}
	}
	return c
}

// step is one step of forest.LeafIndex: the child of split i that x takes.
func step(f *forest.Forest, t *forest.Tree, x []float64, i int) int {
	if f.GoesLeft(t, i, x) {
		return t.Left[i]
	}
	return t.Right[i]
}
