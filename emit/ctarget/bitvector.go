package ctarget

import (
	"fmt"
	"sort"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
)

// Bitvector is the layout after QuickScorer (Lucchese et al., SIGIR 2015):
// every tree's leaves are bits of one 64-bit word, numbered left to right;
// the splits of the whole forest are sorted by feature and threshold, and a
// row clears, for every split it sends right, the bits of that split's left
// subtree in its tree's word. Per feature the splits a value sends right
// are a prefix of the sorted list, so the scan stops at the first split it
// sends left. The leftmost bit left in a tree's word is its exit leaf; the
// leaves are then added in tree order, as every layout adds them.
const Bitvector = "bitvector"

// BitvectorMaxLeaves is the most leaves a tree of the bitvector layout has:
// one 64-bit word per tree.
const BitvectorMaxLeaves = 64

// BitvectorMaxTrees bounds the words NAME_predict keeps on the stack (8
// bytes a tree).
const BitvectorMaxTrees = 8192

// bitvectorFits says why p cannot be written in the bitvector layout, or nil.
// The layout handles numeric splits (<= and <, NaN to either side), any
// number of outputs with trees adding to all of them, float32 sums and every
// transform; it leaves to the table layout set splits, zero-as-missing and
// missing-value bands, trees of one output among several, trees of more than
// 64 leaves, and forests of no splits or more than BitvectorMaxTrees trees.
func bitvectorFits(p *compile.Program) error {
	if len(p.Trees) > BitvectorMaxTrees {
		return fmt.Errorf("%d trees, more than %d", len(p.Trees), BitvectorMaxTrees)
	}
	if p.HasMissingValue {
		return fmt.Errorf("a missing-value band")
	}
	splits := 0
	for ti := range p.Trees {
		t := &p.Trees[ti]
		if t.HasOutput && p.NumOutputs > 1 {
			return fmt.Errorf("tree %d adds to one output of %d", t.Source, p.NumOutputs)
		}
		leaves := 0
		for ni := range t.Nodes {
			n := &t.Nodes[ni]
			switch {
			case n.IsLeaf():
				leaves++
			case n.IsSetSplit():
				return fmt.Errorf("tree %d, node %d: a set split", t.Source, n.ID)
			case n.ZeroMissing:
				return fmt.Errorf("tree %d, node %d: zero counts as missing", t.Source, n.ID)
			default:
				splits++
			}
		}
		if leaves > BitvectorMaxLeaves {
			return fmt.Errorf("tree %d has %d leaves, more than %d", t.Source, leaves, BitvectorMaxLeaves)
		}
	}
	if splits == 0 {
		return fmt.Errorf("no splits")
	}
	return nil
}

// bvSplit is one split in the sorted lists.
type bvSplit struct {
	tree      int
	threshold float64
	lt        bool   // goes left when x < threshold (else x <= threshold)
	mask      uint64 // the tree's leaf bits, less those of the left subtree
}

// bvTree numbers tree t's leaves left to right (an explicit stack, no
// recursion) and returns each leaf node in bit order and, per split, the
// mask that clears its left subtree's leaves.
func bvTree(t *compile.Tree) (leaves []int32, masks map[int32]uint64) {
	first := make([]int, len(t.Nodes)) // first leaf bit under each node
	count := make([]int, len(t.Nodes)) // leaves under each node
	type frame struct {
		node int32
		done bool
	}
	stack := []frame{{0, false}}
	for len(stack) > 0 {
		f := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		n := &t.Nodes[f.node]
		switch {
		case n.IsLeaf():
			first[f.node], count[f.node] = len(leaves), 1
			leaves = append(leaves, f.node)
		case f.done:
			first[f.node] = first[n.Left]
			count[f.node] = count[n.Left] + count[n.Right]
		default:
			stack = append(stack, frame{f.node, true}, frame{n.Right, false}, frame{n.Left, false})
		}
	}
	masks = map[int32]uint64{}
	for ni := range t.Nodes {
		n := &t.Nodes[ni]
		if n.IsLeaf() {
			continue
		}
		l := uint(count[n.Left])
		left := (uint64(1)<<l - 1) << uint(first[n.Left]) // l < 64: the right subtree has a leaf
		masks[int32(ni)] = ^left
	}
	return leaves, masks
}

// bitvector writes the layout's tables and NAME_predict.
func (g *gen) bitvector(w *printer) {
	p := g.p
	nf := len(p.Features)
	byFeature := make([][]bvSplit, nf)
	nanRight := make([][]bvSplit, nf)
	var leafOff []int
	var leafNodes [][2]int // tree, node per leaf bit, trees in order
	for ti := range p.Trees {
		t := &p.Trees[ti]
		leaves, masks := bvTree(t)
		leafOff = append(leafOff, len(leafNodes))
		for _, ni := range leaves {
			leafNodes = append(leafNodes, [2]int{ti, int(ni)})
		}
		for ni := range t.Nodes {
			n := &t.Nodes[ni]
			if n.IsLeaf() {
				continue
			}
			s := bvSplit{tree: ti, threshold: n.Threshold, lt: n.Op != compile.LE, mask: masks[int32(ni)]}
			byFeature[n.Feature] = append(byFeature[n.Feature], s)
			if !n.MissingLeft {
				nanRight[n.Feature] = append(nanRight[n.Feature], s)
			}
		}
	}
	for f := range byFeature {
		sort.SliceStable(byFeature[f], func(i, j int) bool {
			a, b := byFeature[f][i], byFeature[f][j]
			if a.threshold != b.threshold {
				return a.threshold < b.threshold
			}
			return a.lt && !b.lt // at one threshold, < sends right first
		})
	}
	g.bvTables(w, byFeature, nanRight, leafOff, leafNodes)
	g.bvPredict(w)
}

// bvTables writes the sorted splits, the NaN lists and the leaves.
func (g *gen) bvTables(w *printer, byFeature, nanRight [][]bvSplit, leafOff []int, leafNodes [][2]int) {
	var all, nan []bvSplit
	off, nanOff := []int{0}, []int{0}
	for f := range byFeature {
		all = append(all, byFeature[f]...)
		nan = append(nan, nanRight[f]...)
		off, nanOff = append(off, len(all)), append(nanOff, len(nan))
	}
	treeType := "uint16_t"
	if len(g.p.Trees) > 1<<16 {
		treeType = "uint32_t"
	}
	g.bvArray(w, g.ft, "bv_thr", "split thresholds, by feature and threshold", len(all), func(i int) string { return g.lit(all[i].threshold) })
	g.bvArray(w, "unsigned char", "bv_lt", "1 where a split sends x left when x < threshold", len(all), func(i int) string { return map[bool]string{false: "0", true: "1"}[all[i].lt] })
	g.bvArray(w, treeType, "bv_tree", "each split's tree", len(all), func(i int) string { return fmt.Sprint(all[i].tree) })
	g.bvArray(w, "uint64_t", "bv_mask", "each split's tree word less its left subtree's leaves", len(all), func(i int) string { return fmt.Sprintf("0x%016xu", all[i].mask) })
	g.bvArray(w, "uint32_t", "bv_off", "each feature's first split", len(off), func(i int) string { return fmt.Sprint(off[i]) })
	g.bvArray(w, treeType, "bv_nan_tree", "per feature, the splits sending NaN right: tree", max(len(nan), 1), func(i int) string {
		if len(nan) == 0 {
			return "0"
		}
		return fmt.Sprint(nan[i].tree)
	})
	g.bvArray(w, "uint64_t", "bv_nan_mask", "and mask", max(len(nan), 1), func(i int) string {
		if len(nan) == 0 {
			return "0xffffffffffffffffu"
		}
		return fmt.Sprintf("0x%016xu", nan[i].mask)
	})
	g.bvArray(w, "uint32_t", "bv_nan_off", "each feature's first split sending NaN right", len(nanOff), func(i int) string { return fmt.Sprint(nanOff[i]) })
	g.bvArray(w, "uint32_t", "bv_leaf_off", "each tree's first leaf", len(leafOff), func(i int) string { return fmt.Sprint(leafOff[i]) })
	if g.p.NumOutputs == 1 {
		g.bvArray(w, g.at, "bv_leaf", "leaf values, left to right per tree", len(leafNodes), func(i int) string {
			return g.alit(g.leaves[leafNodes[i][0]][leafNodes[i][1]][0])
		})
		return
	}
	rows := g.distinctLeaves()
	w.line("static const %s %s_leaf[%d][%s_NUM_OUTPUTS] = {", g.at, g.name, len(rows.vecs), g.upper)
	for i, v := range rows.vecs {
		w.line("\t{%s}%s", g.joinLits(v), comma(i, len(rows.vecs)))
	}
	w.line("};")
	w.line("")
	g.tables = append(g.tables, Table{Name: g.name + "_leaf", What: "distinct leaf vectors", Len: len(rows.vecs) * g.p.NumOutputs, ElemBytes: g.elemBytes()})
	g.bvArray(w, "uint32_t", "bv_leaf", "each leaf's row of "+g.name+"_leaf, left to right per tree", len(leafNodes), func(i int) string {
		return fmt.Sprint(rows.row(g.leaves[leafNodes[i][0]][leafNodes[i][1]]))
	})
}

// bvArray writes static const TYPE NAME_SUFFIX[n], eight values a line.
func (g *gen) bvArray(w *printer, typ, suffix, what string, n int, val func(i int) string) {
	w.line("/* %s */", what)
	w.line("static const %s %s_%s[%d] = {", typ, g.name, suffix, n)
	for i := 0; i < n; i += 8 {
		var vs []string
		for j := i; j < min(i+8, n); j++ {
			vs = append(vs, val(j))
		}
		w.line("\t%s%s", strings.Join(vs, ", "), comma(min(i+8, n)-1, n))
	}
	w.line("};")
	w.line("")
	g.tables = append(g.tables, Table{Name: g.name + "_" + suffix, What: what, Len: n, ElemBytes: bvElemBytes(typ, g.elemBytes())})
}

// bvElemBytes is the size of one element of typ.
func bvElemBytes(typ string, acc int) int {
	switch typ {
	case "unsigned char", "uint8_t":
		return 1
	case "uint16_t":
		return 2
	case "uint32_t", "float":
		return 4
	case "uint64_t", "double":
		return 8
	}
	return acc
}

// bvPredict writes NAME_predict: the words, the scan per feature, the
// leaves in tree order.
func (g *gen) bvPredict(w *printer) {
	p := g.p
	w.line("/* The index of the lowest set bit of v (v is never 0). */")
	w.line("static int %s_lowest_bit(uint64_t v)", g.name)
	w.line("{")
	w.line("#if defined(__GNUC__)")
	w.line("\treturn __builtin_ctzll(v);")
	w.line("#else")
	w.line("\tint i = 0;")
	w.line("\twhile ((v & 1u) == 0) {")
	w.line("\t\tv >>= 1;")
	w.line("\t\ti++;")
	w.line("\t}")
	w.line("\treturn i;")
	w.line("#endif")
	w.line("}")
	w.line("")
	g.predictStart(w, fmt.Sprintf("uint64_t v[%d];", len(p.Trees)), "uint32_t i;", "int f, t;")
	w.line("for (t = 0; t < %d; t++) {", len(p.Trees))
	w.line("\tv[t] = ~(uint64_t)0;")
	w.line("}")
	w.line("for (f = 0; f < %s_NUM_FEATURES; f++) {", g.upper)
	w.in()
	w.line("%s xf = x[f];", g.ft)
	w.line("if (xf != xf) {")
	w.line("\tfor (i = %s_bv_nan_off[f]; i < %s_bv_nan_off[f + 1]; i++) {", g.name, g.name)
	w.line("\t\tv[%s_bv_nan_tree[i]] &= %s_bv_nan_mask[i];", g.name, g.name)
	w.line("\t}")
	w.line("\tcontinue;")
	w.line("}")
	w.line("for (i = %s_bv_off[f]; i < %s_bv_off[f + 1]; i++) {", g.name, g.name)
	w.line("\tif (%s_bv_lt[i] ? xf < %s_bv_thr[i] : xf <= %s_bv_thr[i]) {", g.name, g.name, g.name)
	w.line("\t\tbreak; /* this split and every later one send xf left */")
	w.line("\t}")
	w.line("\tv[%s_bv_tree[i]] &= %s_bv_mask[i];", g.name, g.name)
	w.line("}")
	w.out()
	w.line("}")
	w.line("for (t = 0; t < %d; t++) {", len(p.Trees))
	leaf := fmt.Sprintf("%s_bv_leaf[%s_bv_leaf_off[t] + (uint32_t)%s_lowest_bit(v[t])]", g.name, g.name, g.name)
	if p.NumOutputs == 1 {
		w.line("\tacc[0] += %s;", leaf)
	} else {
		w.line("\tconst %s *lv = %s_leaf[%s];", g.at, g.name, leaf)
		w.line("\tfor (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("\t\tacc[j] += lv[j];")
		w.line("\t}")
	}
	w.line("}")
}
