package randmodel

import (
	"fmt"
	"math"
	"slices"

	"github.com/sawmill-dev/sawmill/forest"
)

// Shrink makes a failing case smaller while fails still reports it failing:
// it drops rows, trees, classes and unused features, replaces splits by a
// child's subtree or by a leaf, plainens names, and simplifies the header (base score, transform,
// precision) and leaf values, greedily, until no step helps or fails has been
// called budget times. Every candidate passed to fails is a valid forest with
// at least one row. f and rows are not modified.
func Shrink(f *forest.Forest, rows *forest.Rows, fails func(*forest.Forest, *forest.Rows) bool, budget int) (*forest.Forest, *forest.Rows) {
	s := &shrinker{fails: fails, budget: budget, f: cloneForest(f), rows: cloneRows(rows)}
	for progress := true; progress && s.budget > 0; {
		progress = false
		for _, step := range []func() bool{
			s.compact, s.dropRows, s.dropTrees, s.hoistSubtrees, s.cutSubtrees, s.dropClasses,
			s.dropFeatures, s.plainNames, s.simplifyHeader, s.simplifyValues,
		} {
			if step() {
				progress = true
			}
		}
	}
	return s.f, s.rows
}

type shrinker struct {
	fails  func(*forest.Forest, *forest.Rows) bool
	budget int
	f      *forest.Forest
	rows   *forest.Rows
}

// try keeps the candidate when it is valid and still fails.
func (s *shrinker) try(f *forest.Forest, rows *forest.Rows) bool {
	if s.budget <= 0 || f.Validate("candidate") != nil || rows.Len() == 0 {
		return false
	}
	s.budget--
	if !s.fails(f, rows) {
		return false
	}
	s.f, s.rows = f, rows
	return true
}

// dropRows removes rows by halves, then quarters, down to single rows.
func (s *shrinker) dropRows() bool {
	changed := false
	for chunk := (s.rows.Len() + 1) / 2; chunk >= 1; chunk /= 2 {
		for start := 0; start < s.rows.Len() && s.rows.Len() > 1; {
			keep := make([]int, 0, s.rows.Len())
			for i := 0; i < s.rows.Len(); i++ {
				if i < start || i >= start+chunk {
					keep = append(keep, i)
				}
			}
			if len(keep) > 0 && s.try(s.f, subsetRows(s.rows, keep)) {
				changed = true
				continue
			}
			start += chunk
		}
	}
	return changed
}

// dropTrees removes trees by halves down to single trees.
func (s *shrinker) dropTrees() bool {
	changed := false
	for chunk := (len(s.f.Trees) + 1) / 2; chunk >= 1; chunk /= 2 {
		for start := 0; start < len(s.f.Trees) && len(s.f.Trees) > 1; {
			g := cloneForest(s.f)
			end := min(start+chunk, len(g.Trees))
			g.Trees = slices.Delete(g.Trees, start, end)
			if len(g.Trees) > 0 && s.try(g, s.rows) {
				changed = true
				continue
			}
			start += chunk
		}
	}
	return changed
}

// compact drops unreachable node slots and renumbers each tree in preorder.
func (s *shrinker) compact() bool {
	g := cloneForest(s.f)
	same := true
	for ti := range g.Trees {
		c := compactTree(&g.Trees[ti], g.NumOutputs())
		if c.NumNodes() != g.Trees[ti].NumNodes() || !slices.Equal(c.Left, g.Trees[ti].Left) {
			same = false
		}
		g.Trees[ti] = c
	}
	return !same && s.try(g, s.rows)
}

// hoistSubtrees replaces splits by one of their children's subtrees,
// nearest the root first.
func (s *shrinker) hoistSubtrees() bool {
	changed := false
	k := s.f.NumOutputs()
	for ti := 0; ti < len(s.f.Trees); ti++ {
		for i := 0; i < s.f.Trees[ti].NumNodes(); i++ {
			t := &s.f.Trees[ti]
			if t.IsLeaf(i) || !reachable(t)[i] {
				continue
			}
			for _, c := range []int{t.Left[i], t.Right[i]} {
				g := cloneForest(s.f)
				gt := &g.Trees[ti]
				w := gt.Width(k)
				gt.Feature[i], gt.Threshold[i], gt.MissingLeft[i] = gt.Feature[c], gt.Threshold[c], gt.MissingLeft[c]
				gt.Left[i], gt.Right[i] = gt.Left[c], gt.Right[c]
				if gt.Categories != nil {
					gt.Categories[i] = gt.Categories[c]
				}
				if gt.ZeroMissing != nil {
					gt.ZeroMissing[i] = gt.ZeroMissing[c]
				}
				copy(gt.Value[i*w:(i+1)*w], gt.Value[c*w:(c+1)*w])
				*gt = compactTree(gt, k)
				if s.try(g, s.rows) {
					changed = true
					i = -1 // the tree was renumbered: start it again
					break
				}
			}
		}
	}
	return changed
}

// cutSubtrees turns splits into leaves, nearest the root first, taking the
// value of a leaf below (the left-most, else the right-most).
func (s *shrinker) cutSubtrees() bool {
	changed := false
	k := s.f.NumOutputs()
	for ti := 0; ti < len(s.f.Trees); ti++ {
		for i := 0; i < s.f.Trees[ti].NumNodes(); i++ {
			t := &s.f.Trees[ti]
			if t.IsLeaf(i) || !reachable(t)[i] {
				continue
			}
			for _, leftmost := range []bool{true, false} {
				g := cloneForest(s.f)
				gt := &g.Trees[ti]
				leaf := i
				for !gt.IsLeaf(leaf) {
					if leftmost {
						leaf = gt.Left[leaf]
					} else {
						leaf = gt.Right[leaf]
					}
				}
				w := gt.Width(k)
				copy(gt.Value[i*w:(i+1)*w], gt.Value[leaf*w:(leaf+1)*w])
				gt.Left[i], gt.Right[i], gt.Feature[i], gt.Threshold[i] = -1, -1, -1, 0
				*gt = compactTree(gt, k)
				if s.try(g, s.rows) {
					changed = true
					i = -1 // the tree was renumbered: start it again
					break
				}
			}
		}
	}
	return changed
}

// dropClasses removes one class at a time where the model stays valid.
func (s *shrinker) dropClasses() bool {
	changed := false
	for j := 0; s.f.IsClassifier() && len(s.f.Classes) > 2 && j < len(s.f.Classes); j++ {
		if s.try(dropOutput(s.f, j), s.rows) {
			changed = true
			j--
		}
	}
	return changed
}

func dropOutput(f *forest.Forest, j int) *forest.Forest {
	g := cloneForest(f)
	k := f.NumOutputs()
	g.Classes = slices.Delete(g.Classes, j, j+1)
	g.BaseScore = slices.Delete(g.BaseScore, j, j+1)
	var trees []forest.Tree
	for ti := range g.Trees {
		t := &g.Trees[ti]
		if t.HasOutput { // a tree of output j goes with it; later outputs move down
			if t.Output != j {
				if t.Output > j {
					t.Output--
				}
				trees = append(trees, *t)
			}
			continue
		}
		var v []float64
		for i := 0; i < t.NumNodes(); i++ {
			for c := 0; c < k; c++ {
				if c != j {
					v = append(v, t.Value[i*k+c])
				}
			}
		}
		t.Value = v
		trees = append(trees, *t)
	}
	g.Trees = trees
	return g
}

// dropFeatures removes features no reachable split tests.
func (s *shrinker) dropFeatures() bool {
	used := make([]bool, len(s.f.Features))
	for ti := range s.f.Trees {
		t := &s.f.Trees[ti]
		for i, r := range reachable(t) {
			if r && !t.IsLeaf(i) {
				used[t.Feature[i]] = true
			}
		}
	}
	if !slices.Contains(used, false) || !slices.Contains(used, true) {
		return false
	}
	g := cloneForest(s.f)
	newIdx := make([]int, len(used))
	g.Features = nil
	var keep []int
	for i, u := range used {
		newIdx[i] = -1
		if u {
			newIdx[i] = len(g.Features)
			g.Features = append(g.Features, s.f.Features[i])
			keep = append(keep, i)
		}
	}
	for ti := range g.Trees {
		t := &g.Trees[ti]
		*t = compactTree(t, g.NumOutputs())
		for i := range t.Feature {
			if t.Feature[i] >= 0 {
				t.Feature[i] = newIdx[t.Feature[i]]
			}
		}
	}
	rows := &forest.Rows{Features: g.Features, Line: slices.Clone(s.rows.Line)}
	for r := 0; r < s.rows.Len(); r++ {
		for _, i := range keep {
			rows.Values = append(rows.Values, s.rows.Row(r)[i])
		}
	}
	return s.try(g, rows)
}

// plainNames replaces feature names and class labels by plain ones, one at a
// time, keeping the hostile ones the failure needs.
func (s *shrinker) plainNames() bool {
	changed := false
	for i := range s.f.Features {
		plain := fmt.Sprintf("f%d", i)
		if s.f.Features[i] == plain || slices.Contains(s.f.Features, plain) {
			continue
		}
		g := cloneForest(s.f)
		g.Features[i] = plain
		rows := cloneRows(s.rows)
		rows.Features = g.Features
		if s.try(g, rows) {
			changed = true
		}
	}
	for i := range s.f.Classes {
		plain := fmt.Sprintf("c%d", i)
		if s.f.Classes[i] == plain || slices.Contains(s.f.Classes, plain) {
			continue
		}
		g := cloneForest(s.f)
		g.Classes[i] = plain
		if s.try(g, s.rows) {
			changed = true
		}
	}
	return changed
}

// simplifyHeader tries a zero base score, no transform, float64 inputs, no
// provenance.
func (s *shrinker) simplifyHeader() bool {
	changed := false
	edits := []func(g *forest.Forest) bool{
		func(g *forest.Forest) bool {
			z := !slices.ContainsFunc(g.BaseScore, func(v float64) bool { return v != 0 || math.Signbit(v) })
			clear(g.BaseScore)
			return !z
		},
		func(g *forest.Forest) bool {
			if g.Transform == forest.NoTransform || g.Transform == forest.Logistic && g.IsClassifier() {
				return false // a logistic classifier has one output; none would change the shape
			}
			g.Transform = forest.NoTransform
			return true
		},
		func(g *forest.Forest) bool {
			was := g.InputPrecision
			g.InputPrecision = forest.Float64
			return was != forest.Float64
		},
		func(g *forest.Forest) bool {
			was := g.Provenance
			g.Provenance = nil
			return was != nil
		},
		func(g *forest.Forest) bool {
			was := g.Accumulate
			g.Accumulate = ""
			return was != ""
		},
		func(g *forest.Forest) bool {
			was := g.TransformScale
			g.TransformScale = 0
			return was != 0
		},
		func(g *forest.Forest) bool {
			was := g.HasMissingValue
			g.HasMissingValue, g.MissingValue = false, 0
			return was
		},
		func(g *forest.Forest) bool {
			was := g.CategoryMatch
			g.CategoryMatch = ""
			return was != ""
		},
	}
	for _, e := range edits {
		g := cloneForest(s.f)
		if e(g) && s.try(g, s.rows) {
			changed = true
		}
	}
	return changed
}

// simplifyValues tries leaf values of 0, then of 1, one tree at a time.
func (s *shrinker) simplifyValues() bool {
	changed := false
	for ti := range s.f.Trees {
		for _, v := range []float64{0, 1} {
			t := &s.f.Trees[ti]
			if !slices.ContainsFunc(t.Value, func(x float64) bool { return math.Float64bits(x) != math.Float64bits(v) }) {
				break
			}
			g := cloneForest(s.f)
			for i := range g.Trees[ti].Value {
				g.Trees[ti].Value[i] = v
			}
			if s.try(g, s.rows) {
				changed = true
				break
			}
		}
	}
	return changed
}

// reachable marks the nodes reached from the root (valid trees only).
func reachable(t *forest.Tree) []bool {
	seen := make([]bool, t.NumNodes())
	stack := []int{0}
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		seen[i] = true
		if !t.IsLeaf(i) {
			stack = append(stack, t.Right[i], t.Left[i])
		}
	}
	return seen
}

// compactTree keeps only the reachable nodes of a valid tree, renumbered in
// preorder, with their categories and zero_missing flags (dropped when no
// node keeps one) and the tree's output.
func compactTree(t *forest.Tree, k int) forest.Tree {
	out := forest.Tree{HasOutput: t.HasOutput, Output: t.Output}
	k = t.Width(k)
	var cats [][]int32
	var zeros []bool
	anyCat, anyZero := false, false
	type item struct {
		src, parent int
		left        bool
	}
	stack := []item{{0, -1, false}}
	for len(stack) > 0 {
		it := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		id := len(out.Left)
		if it.parent >= 0 {
			if it.left {
				out.Left[it.parent] = id
			} else {
				out.Right[it.parent] = id
			}
		}
		leaf := t.IsLeaf(it.src)
		feat, th := t.Feature[it.src], t.Threshold[it.src]
		if leaf {
			feat, th = -1, 0
		}
		out.Feature = append(out.Feature, feat)
		out.Threshold = append(out.Threshold, th)
		out.Left = append(out.Left, -1)
		out.Right = append(out.Right, -1)
		out.MissingLeft = append(out.MissingLeft, t.MissingLeft[it.src] && !leaf)
		var c []int32
		if !leaf && t.IsSetSplit(it.src) {
			c, anyCat = t.Categories[it.src], true
		}
		cats = append(cats, c)
		z := !leaf && t.ZeroMissing != nil && t.ZeroMissing[it.src]
		anyZero = anyZero || z
		zeros = append(zeros, z)
		if leaf {
			out.Value = append(out.Value, t.Value[it.src*k:(it.src+1)*k]...)
		} else {
			out.Value = append(out.Value, make([]float64, k)...)
			stack = append(stack, item{t.Right[it.src], id, false}, item{t.Left[it.src], id, true})
		}
	}
	if anyCat {
		out.Categories = cats
	}
	if anyZero {
		out.ZeroMissing = zeros
	}
	return out
}

func cloneForest(f *forest.Forest) *forest.Forest {
	g := *f
	g.Features = slices.Clone(f.Features)
	g.Classes = slices.Clone(f.Classes)
	g.BaseScore = slices.Clone(f.BaseScore)
	g.Provenance = slices.Clone(f.Provenance)
	g.Trees = make([]forest.Tree, len(f.Trees))
	for i, t := range f.Trees {
		g.Trees[i] = forest.Tree{
			Feature: slices.Clone(t.Feature), Threshold: slices.Clone(t.Threshold),
			Left: slices.Clone(t.Left), Right: slices.Clone(t.Right),
			MissingLeft: slices.Clone(t.MissingLeft), Value: slices.Clone(t.Value),
			HasOutput: t.HasOutput, Output: t.Output, ZeroMissing: slices.Clone(t.ZeroMissing),
		}
		if t.Categories != nil {
			g.Trees[i].Categories = make([][]int32, len(t.Categories))
			for j, c := range t.Categories {
				if c != nil {
					g.Trees[i].Categories[j] = slices.Clone(c)
				}
			}
		}
	}
	return &g
}

func cloneRows(r *forest.Rows) *forest.Rows {
	return &forest.Rows{Features: slices.Clone(r.Features), Values: slices.Clone(r.Values), Line: slices.Clone(r.Line)}
}

func subsetRows(r *forest.Rows, keep []int) *forest.Rows {
	out := &forest.Rows{Features: r.Features}
	for _, i := range keep {
		out.Values = append(out.Values, r.Row(i)...)
		out.Line = append(out.Line, r.Line[i])
	}
	return out
}
