package ctarget

import (
	"fmt"
	"math"

	"github.com/sawmill-dev/sawmill/compile"
)

// Perfect is the layout whose NAME_predict_batch walks every tree as a
// perfect binary tree of the forest's depth D: node i's children are 2i+1
// and 2i+2, so a tree needs no child links, only per node a feature word
// (the feature << 1 | NaN goes right) and a threshold, and 2^D leaf values.
// A leaf above depth D becomes a subtree whose leaves all carry its value,
// so whichever way its padding splits send a row, the sum is the same. A
// block of PerfectRows rows takes, tree by tree, exactly D steps per row,
//
//	i = 2*i + 1 + ((x[f] > t) | (isnan(x[f]) & nanRight))
//
// with no branch on the data, and then adds the leaf 2^D-1 places below
// the last node; each row's leaves are added in tree order, so the outputs
// are NAME_predict's bit for bit. NAME_predict is the table layout's.
const Perfect = "perfect"

// PerfectRows is the number of rows a block walks together.
const PerfectRows = 16

// PerfectMaxDepth is the deepest forest the layout pads: a tree takes
// 2^D - 1 feature words and thresholds and 2^D leaves, whatever its shape.
const PerfectMaxDepth = 10

// perfectMaxGrowth bounds the padding: the perfect trees may hold at most
// this many times the forest's nodes (a 500-round depth-6 XGBoost model
// grows 1.5 times, 42,898 nodes to 63,500).
const perfectMaxGrowth = 4

// perfectForest is the forest as the perfect walk stores it.
type perfectForest struct {
	depth int       // D: every tree's steps
	feat  []uint32  // per tree, per split in level order: feature << 1 | NaN goes right
	thr   []float64 // per tree, per split: the threshold (+inf in padding)
	leaf  []float64 // per tree, per leaf left to right, per output: the value
	ge    bool      // a row goes right when x >= thr (every split a <), else x > thr
	// thrType is the C type of the thresholds: float where every one is a
	// float32 value (as XGBoost's cuts are), else the arithmetic's type.
	thrType string
	featTyp string // uint8_t, uint16_t or uint32_t
}

// forestDepth is the depth of p's deepest tree (a lone leaf has depth 0).
func forestDepth(p *compile.Program) int {
	deepest := 0
	for ti := range p.Trees {
		deepest = max(deepest, treeDepth(&p.Trees[ti], 0, 0))
	}
	return deepest
}

// treeDepth is the depth of the subtree at node ni, which lies at depth d.
func treeDepth(t *compile.Tree, ni int32, d int) int {
	n := &t.Nodes[ni]
	if n.IsLeaf() {
		return d
	}
	return max(treeDepth(t, n.Left, d+1), treeDepth(t, n.Right, d+1))
}

// perfectFits says why p cannot be written in the perfect layout, or nil:
// it takes what blockFits takes (numeric splits, any number of outputs,
// float32 sums) of depth 1 to PerfectMaxDepth, where the padded trees hold at
// most perfectMaxGrowth times the forest's nodes.
func perfectFits(g *gen) error {
	if err := blockFits(g); err != nil {
		return err
	}
	p := g.p
	d := forestDepth(p)
	if d == 0 {
		return fmt.Errorf("every tree is one leaf")
	}
	if d > PerfectMaxDepth {
		return fmt.Errorf("trees of depth %d, deeper than %d", d, PerfectMaxDepth)
	}
	padded := len(p.Trees) * (1<<(d+1) - 1)
	if padded > perfectMaxGrowth*p.NumNodes() {
		return fmt.Errorf("perfect trees of depth %d would hold %d nodes, more than %d times the forest's %d", d, padded, perfectMaxGrowth, p.NumNodes())
	}
	if len(p.Features) > 1<<31 {
		return fmt.Errorf("%d features", len(p.Features))
	}
	return nil
}

// perfectResolve is Resolve's answer when the perfect layout is asked for.
func perfectResolve(p *compile.Program, o Options) (string, string) {
	g := &gen{p: p, o: o}
	if err := perfectFits(g); err != nil {
		return "table", fmt.Sprintf("perfect asked for, but %v: the table layout instead", err)
	}
	return Perfect, "asked for"
}

// allLT reports whether every split of p is a <, so that a row goes right
// when x >= t and the thresholds stay the model's own.
func allLT(p *compile.Program) bool {
	for ti := range p.Trees {
		for ni := range p.Trees[ti].Nodes {
			n := &p.Trees[ti].Nodes[ni]
			if !n.IsLeaf() && n.Op != compile.LT {
				return false
			}
		}
	}
	return true
}

// buildPerfect pads every tree to depth D and lays it out level by level.
func (g *gen) buildPerfect() *perfectForest {
	p := g.p
	pf := &perfectForest{depth: forestDepth(p), ge: allLT(p)}
	inner, leaves := 1<<pf.depth-1, 1<<pf.depth
	for ti := range p.Trees {
		base, lbase := len(pf.feat), len(pf.leaf)
		pf.feat = append(pf.feat, make([]uint32, inner)...)
		pf.thr = append(pf.thr, make([]float64, inner)...)
		pf.leaf = append(pf.leaf, make([]float64, leaves*p.NumOutputs)...)
		g.perfectPlace(pf, ti, 0, 0, pf.feat[base:], pf.thr[base:], pf.leaf[lbase:])
	}
	pf.thrType = "float"
	for _, t := range pf.thr {
		if !math.IsInf(t, 1) && float64(float32(t)) != t {
			pf.thrType = g.ft
		}
	}
	pf.featTyp = "uint32_t"
	switch n := len(p.Features); {
	case n <= 128:
		pf.featTyp = "uint8_t"
	case n <= 1<<15:
		pf.featTyp = "uint16_t"
	}
	return pf
}

// perfectPlace puts node ni of tree ti at position at of the perfect tree
// (level order), a leaf filling every position of its padding subtree.
func (g *gen) perfectPlace(pf *perfectForest, ti int, ni int32, at int, feat []uint32, thr, leaf []float64) {
	n := &g.p.Trees[ti].Nodes[ni]
	inner := len(thr)
	if at >= inner { // a leaf at depth D
		copy(leaf[(at-inner)*g.p.NumOutputs:], g.leaves[ti][ni])
		return
	}
	if n.IsLeaf() { // padding: every row goes left (x > +inf never holds)
		feat[at], thr[at] = 0, math.Inf(1)
		g.perfectPlace(pf, ti, ni, 2*at+1, feat, thr, leaf)
		g.perfectPlace(pf, ti, ni, 2*at+2, feat, thr, leaf)
		return
	}
	th := n.Threshold
	if !pf.ge {
		th, _ = g.normalise(n.Op, n.Threshold)
	}
	if th == 0 {
		th = 0 // x > -0 and x > 0 agree everywhere, as do x >= -0 and x >= 0
	}
	feat[at], thr[at] = uint32(n.Feature)<<1, th
	if !n.MissingLeft {
		feat[at] |= 1
	}
	g.perfectPlace(pf, ti, n.Left, 2*at+1, feat, thr, leaf)
	g.perfectPlace(pf, ti, n.Right, 2*at+2, feat, thr, leaf)
}

// perfect writes the table layout's NAME_predict and arranges for the
// perfect walk's tables and NAME_predict_batch to follow.
func (g *gen) perfect(w *printer) error {
	if err := g.table(w); err != nil {
		return err
	}
	pf := g.buildPerfect()
	g.batch = func(w *printer) {
		g.perfectTables(w, pf)
		g.perfectBlock(w, pf)
		g.blockLoop(w, "perfect", "PF_ROWS")
	}
	return nil
}

// perfectTables writes the feature words, the thresholds and the leaves.
func (g *gen) perfectTables(w *printer, pf *perfectForest) {
	inner := 1<<pf.depth - 1
	w.line("#define %s_PF_DEPTH %d", g.upper, pf.depth)
	w.line("#define %s_PF_INNER %du /* splits a tree: 2^depth - 1 */", g.upper, inner)
	w.line("#define %s_PF_ROWS %d", g.upper, PerfectRows)
	w.line("")
	g.bvArray(w, pf.featTyp, "pf_feat", "perfect walk: per tree, per split in level order (node i's children 2i+1 and 2i+2), the feature << 1 | NaN goes right", len(pf.feat), func(i int) string {
		return fmt.Sprintf("%du", pf.feat[i])
	})
	g.bvArray(w, pf.thrType, "pf_thr", fmt.Sprintf("perfect walk: per tree, per split, the row goes right when x %s this (+inf in padding)", map[bool]string{true: ">=", false: ">"}[pf.ge]), len(pf.thr), func(i int) string {
		t := pf.thr[i]
		if math.IsInf(t, 1) {
			return map[string]string{"double": "HUGE_VAL", "float": "HUGE_VALF"}[pf.thrType]
		}
		if pf.thrType == "float" {
			return floatLit(t)
		}
		return doubleLit(t)
	})
	g.bvArray(w, g.at, "pf_leaf", "perfect walk: per tree, per leaf left to right, per output, the value", len(pf.leaf), func(i int) string {
		return g.alit(pf.leaf[i])
	})
}

// perfectBlock writes NAME_perfect, which scores one block of up to
// PerfectRows rows.
func (g *gen) perfectBlock(w *printer, pf *perfectForest) {
	ft, nf, no, u := g.ft, g.upper+"_NUM_FEATURES", g.upper+"_NUM_OUTPUTS", g.upper
	cmp := map[bool]string{true: ">=", false: ">"}[pf.ge]
	w.line("/* Scores the count <= %s_PF_ROWS rows at x into outs: tree by tree, every", u)
	w.line(" * row of the block taking %s_PF_DEPTH steps, each a comparison and an", u)
	w.line(" * addition (no branch on the data); then each row's leaves are added in tree")
	w.line(" * order, as %s_predict adds them. Lanes past count walk row 0 and are", g.name)
	w.line(" * dropped. */")
	w.line("static void %s_perfect(const %s *x, size_t count, %s *outs)", g.name, ft, ft)
	w.line("{")
	w.in()
	w.line("%s sum[%s_PF_ROWS * %s];", g.at, u, no)
	w.line("uint32_t node[%s_PF_ROWS], off[%s_PF_ROWS];", u, u)
	w.line("uint32_t tree, step, lane;")
	w.line("int j;")
	w.line("for (lane = 0; lane < %s_PF_ROWS; lane++) {", u)
	w.line("\toff[lane] = lane < count ? lane * (uint32_t)%s : 0u;", nf)
	for j := 0; j < g.p.NumOutputs; j++ {
		w.line("\tsum[lane * %s + %du] = %s;", no, j, g.accStart(j))
	}
	w.line("}")
	w.line("for (tree = 0; tree < %du; tree++) {", len(g.p.Trees))
	w.in()
	w.line("const %s *const fe = %s_pf_feat + tree * %s_PF_INNER;", pf.featTyp, g.name, u)
	w.line("const %s *const th = %s_pf_thr + tree * %s_PF_INNER;", pf.thrType, g.name, u)
	w.line("const %s *const lv = %s_pf_leaf + tree * (%s_PF_INNER + 1u) * %s;", g.at, g.name, u, no)
	w.line("for (lane = 0; lane < %s_PF_ROWS; lane++) {", u)
	w.line("\tnode[lane] = 0u;")
	w.line("}")
	w.line("for (step = 0; step < %s_PF_DEPTH; step++) {", u)
	w.in()
	w.line("for (lane = 0; lane < %s_PF_ROWS; lane++) {", u)
	w.in()
	w.line("const uint32_t i = node[lane], f = fe[i];")
	w.line("const %s v = x[off[lane] + (f >> 1)];", ft)
	t := "th[i]"
	if pf.thrType != ft {
		t = "(" + ft + ")th[i]" // exact: every float is a double
	}
	w.line("const uint32_t right = (uint32_t)(v %s %s) | ((uint32_t)(v != v) & f);", cmp, t)
	w.line("node[lane] = 2u * i + 1u + right;")
	w.out()
	w.line("}")
	w.out()
	w.line("}")
	g.perfectAdd(w)
	w.out()
	w.line("}")
	g.batchFinish(w)
	w.out()
	w.line("}")
}

// perfectAdd writes the addition of the leaf each lane reached.
func (g *gen) perfectAdd(w *printer) {
	u := g.upper
	w.line("for (lane = 0; lane < %s_PF_ROWS; lane++) {", u)
	if g.p.NumOutputs == 1 {
		w.line("\tsum[lane] += lv[node[lane] - %s_PF_INNER];", u)
	} else {
		w.line("\tconst %s *const l = lv + (node[lane] - %s_PF_INNER) * %s_NUM_OUTPUTS;", g.at, u, u)
		w.line("\tfor (j = 0; j < %s_NUM_OUTPUTS; j++) {", u)
		w.line("\t\tsum[lane * %s_NUM_OUTPUTS + (uint32_t)j] += l[j];", u)
		w.line("\t}")
	}
	w.line("}")
}
