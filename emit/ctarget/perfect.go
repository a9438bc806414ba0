package ctarget

import (
	"fmt"
	"math"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
)

// Perfect is the layout whose NAME_predict_batch walks every tree as a
// perfect binary tree of the forest's depth D: node i's children are 2i+1
// and 2i+2, so a tree needs no child links, only per node a key index (the
// feature << 1 | NaN goes right) and a threshold, and 2^D leaf values.
// A leaf above depth D becomes a subtree whose leaves all carry its value,
// so whichever way its padding splits send a row, the sum is the same.
//
// A block of rows (up to PerfectMaxRows, see perfectRows) first writes each row's keys: per feature,
// the input with NaN as -inf (key 2f) and as +inf (key 2f+1), so that one
// comparison routes NaN the node's way. Then tree by tree each row takes
// exactly D steps,
//
//	i = 2*i + 1 + (key[f2] > t)
//
// rows interleaved (perfectChains), with no branch on the data, and adds the leaf
// 2^D-1 places below the last node; each row's leaves are added in tree
// order, so the outputs are NAME_predict's bit for bit. In double C the
// keys and thresholds are floats where that is exact for every split (see
// floatExact): XGBoost's cuts are. Float keys and thresholds are walked as
// ordered integers packed with the key index into one word a node
// (perfect_ord.go). NAME_predict is what auto would write
// for the model, nested or table (perfectNested).
const Perfect = "perfect"

// PerfectMaxRows is the most rows a block walks together. Every block
// reads the whole forest's tables, so more rows a block read them fewer
// times: on a 500-tree depth-6 XGBoost model (285 KB of tables), 64 rows
// took 65 first-level cache misses a row against 220 with 16 and 410 with 8
// (cachegrind, 32 KB L1 data cache, 2,000 rows, reading included).
const PerfectMaxRows = 64

// perfectKeyBytes bounds a block's keys on the stack, but for one group
// of chains (perfectRows).
const perfectKeyBytes = 32768

// perfectChains is the number of rows whose steps are interleaved in the
// code, so that their loads overlap, where keys are doubles. On the XGBoost
// depth-6 model, 8 took 1,957 and 1,973 ns a row against 4's 2,289 and
// 2,307 (best of 5 runs of 5, 10,000 rows, two runs, load average 4.4 on 2
// cores) though they run 22,953 instructions a row against 19,740 (gcc 12
// -O2 spills some).
const perfectChains = 8

// PerfectMaxFeatures bounds the features, so that a group of chains'
// keys (two per feature and row, 8 bytes each) take at most 64 KiB of stack.
const PerfectMaxFeatures = 256

// PerfectMaxDepth is the deepest forest the layout pads: a tree takes
// 2^D - 1 feature words and thresholds and 2^D leaves, whatever its shape.
const PerfectMaxDepth = 10

// perfectMaxGrowth bounds the padding: the perfect trees may hold at most
// this many times the forest's nodes (a 500-round depth-6 XGBoost model
// grows 1.5 times, 42,898 nodes to 63,500), or perfectSmall nodes.
const perfectMaxGrowth = 4

// perfectSmall is the most padded nodes a forest may take whatever its
// growth: 4,096 nodes are 41 KB of tables at most in double.
const perfectSmall = 4096

// perfectForest is the forest as the perfect walk stores it.
type perfectForest struct {
	depth int       // D: every tree's steps
	feat  []uint32  // per tree, per split in level order: feature << 1 | NaN goes right
	thr   []float64 // per tree, per split: the threshold (+inf in padding), as keyType stores it
	leaf  []float64 // per tree, per leaf left to right, per output: the value
	ge    bool      // a row goes right when x >= thr (every split a <), else x > thr
	// keyType is the C type of the keys and thresholds: float where that
	// is exact at every split (floatExact), else the arithmetic's type.
	keyType string
	featTyp string // uint8_t or uint16_t
	rows    int    // a block's rows: see perfectRows
	ord     bool   // float keys: nodes and keys as packed ordered integers (perfect_ord.go)
}

// chains is the number of rows whose steps the walk interleaves:
// perfectOrdChains where keys are ordered integers, else perfectChains.
func (pf *perfectForest) chains() int {
	if pf.ord {
		return perfectOrdChains
	}
	return perfectChains
}

// perfectRowKeyBytes is a row's keys in a block: two a feature, 8 bytes
// each (packed ordered integers or doubles).
func perfectRowKeyBytes(features int) int { return 2 * features * 8 }

// perfectRows is the rows of a block of chains-row groups with features
// features: as many as perfectKeyBytes of keys hold, a multiple of chains,
// at most PerfectMaxRows, and at least one group.
func perfectRows(features, chains int) int {
	r := min(perfectKeyBytes/perfectRowKeyBytes(features), PerfectMaxRows) / chains * chains
	return max(chains, r)
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
// most perfectMaxGrowth times the forest's nodes or perfectSmall.
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
	if padded > perfectSmall && padded > perfectMaxGrowth*p.NumNodes() {
		return fmt.Errorf("perfect trees of depth %d would hold %d nodes, more than %d and than %d times the forest's %d", d, padded, perfectSmall, perfectMaxGrowth, p.NumNodes())
	}
	if len(p.Features) > PerfectMaxFeatures {
		return fmt.Errorf("%d features, more than %d (a block's keys live on the stack)", len(p.Features), PerfectMaxFeatures)
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

// Batch is not a layout of its own: it asks for the fastest batch walk
// the model takes on a desktop or server CPU, by the crossovers measured
// in docs/batch-layouts.md: perfect where it builds, else block, else what
// auto writes. auto never picks those two itself, as their tables and the
// keys they keep on the stack would land on microcontroller builds, which
// auto cannot tell from servers; batch is how a user says which it is.
const Batch = "batch"

// batchResolve is Resolve's answer when batch is asked for.
func batchResolve(p *compile.Program, o Options) (string, string, error) {
	g := &gen{p: p, o: o}
	notPerfect := perfectFits(g)
	if notPerfect == nil {
		return Perfect, fmt.Sprintf("batch asked for: trees at most %d deep, padded to perfect trees", forestDepth(p)), nil
	}
	notBlock := blockAccepts(g)
	if notBlock == nil {
		return Block, fmt.Sprintf("batch asked for; not perfect (%v): the block walk", notPerfect), nil
	}
	o.Layout = emit.Auto
	l, why, err := resolveLayout(p, o)
	return l, fmt.Sprintf("batch asked for, but neither perfect (%v) nor block (%v): auto's choice, %s", notPerfect, notBlock, why), err
}

// perfectNested reports whether the perfect layout writes NAME_predict as
// nested code: where auto would (AutoNestedNodes, AutoNestedTreeNodes), as
// it is the fastest single-row walk that builds quickly.
func perfectNested(p *compile.Program) bool {
	biggest := 0
	for i := range p.Trees {
		biggest = max(biggest, len(p.Trees[i].Nodes))
	}
	return p.NumNodes() <= AutoNestedNodes && biggest <= AutoNestedTreeNodes
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
	pf.keyType = g.keyType(pf.thr, pf.ge)
	pf.featTyp = "uint16_t"
	if len(p.Features) <= 128 {
		pf.featTyp = "uint8_t"
	}
	pf.ord = pf.keyType == "float"
	pf.rows = perfectRows(len(p.Features), pf.chains())
	return pf
}

// keyType is the C type of a batch walk's keys and thresholds: float where
// that decides every split of thr as the arithmetic's type does
// (floatExact), when thr is rounded to floats in place; else g.ft.
func (g *gen) keyType(thr []float64, ge bool) string {
	for _, t := range thr {
		if !floatExact(t, ge) {
			return g.ft
		}
	}
	for i, t := range thr {
		if thr[i] = float64(float32(t)); thr[i] == 0 {
			thr[i] = 0 // never -0: the ordered keys (perfect_ord.go) tell the zeros apart
		}
	}
	return "float"
}

// floatExact reports whether a split x > t (x >= t when ge) of a double x
// decides the same as (float)x > (float)t ((float)x >= (float)t): rounding
// to float is monotone, so it does when no double beyond t on the other
// side rounds to the float t does. For x > t: the double after t rounds
// above (float)t; for x >= t: the double before t rounds below. A float32
// model's cuts, compiled for double C to the midpoints a float rounds
// across, pass; +inf (padding) passes.
func floatExact(t float64, ge bool) bool {
	if math.IsInf(t, 0) {
		return true
	}
	if ge {
		return float32(math.Nextafter(t, math.Inf(-1))) < float32(t)
	}
	return float32(math.Nextafter(t, math.Inf(1))) > float32(t)
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

// perfect writes NAME_predict as auto would (nested code where auto writes
// nested, else the table layout's) and arranges for the perfect walk's
// tables and NAME_predict_batch to follow.
func (g *gen) perfect(w *printer) error {
	if perfectNested(g.p) {
		g.nested(w)
	} else if err := g.table(w); err != nil {
		return err
	}
	pf := g.buildPerfect()
	g.pf = pf
	g.batch = func(w *printer) {
		g.perfectTables(w, pf)
		if pf.ord {
			g.perfectOrdStep(w, pf)
		}
		g.perfectBlock(w, pf)
		g.blockLoop(w, "perfect", "PF_ROWS")
	}
	return nil
}

// perfectTables writes the key indexes, the thresholds and the leaves.
func (g *gen) perfectTables(w *printer, pf *perfectForest) {
	inner := 1<<pf.depth - 1
	w.line("#define %s_PF_DEPTH %d", g.upper, pf.depth)
	w.line("#define %s_PF_INNER %du /* splits a tree: 2^depth - 1 */", g.upper, inner)
	w.line("#define %s_PF_ROWS %d /* a block's rows: %d bytes of keys */", g.upper, pf.rows, pf.rows*perfectRowKeyBytes(len(g.p.Features)))
	w.line("#define %s_PF_KEYS (2u * %s_NUM_FEATURES) /* a row's keys: each feature with NaN as -inf, then as +inf */", g.upper, g.upper)
	w.line("")
	if pf.ord {
		g.perfectOrdFunc(w)
		g.perfectOrdNodes(w, pf)
	} else {
		g.perfectFloatTables(w, pf)
	}
	g.bvArray(w, g.at, "pf_leaf", "perfect walk: per tree, per leaf left to right, per output, the value", len(pf.leaf), func(i int) string {
		return g.alit(pf.leaf[i])
	})
}

// perfectFloatTables writes the key indexes and the thresholds of the walk
// whose keys are doubles.
func (g *gen) perfectFloatTables(w *printer, pf *perfectForest) {
	g.bvArray(w, pf.featTyp, "pf_feat", "perfect walk: per tree, per split in level order (node i's children 2i+1 and 2i+2), the key: feature << 1 | NaN goes right", len(pf.feat), func(i int) string {
		return fmt.Sprintf("%du", pf.feat[i])
	})
	what := fmt.Sprintf("perfect walk: per tree, per split, the row goes right when its key %s this (+inf in padding)", pf.cmp())
	g.bvArray(w, pf.keyType, "pf_thr", what, len(pf.thr), func(i int) string {
		t := pf.thr[i]
		if math.IsInf(t, 0) { // +inf in padding; -inf where the model splits off x <= -inf
			sign := map[bool]string{true: "", false: "-"}[t > 0]
			return sign + hugeVal(pf.keyType)
		}
		return doubleLit(t)
	})
}

// hugeVal is C's +inf of the key type kt (float or double).
func hugeVal(kt string) string {
	if kt == "float" {
		return "HUGE_VALF"
	}
	return "HUGE_VAL"
}

// keyPair writes the two keys of the input v that the batch walks store:
// lo with NaN as -inf, hi with NaN as +inf, both of type kt, note ending the
// first line where v is converted to kt.
func (g *gen) keyPair(w *printer, lo, hi, kt, note string) {
	inf := hugeVal(kt)
	cast := ""
	if kt != g.ft {
		cast = "(" + kt + ")"
	} else {
		note = ""
	}
	w.line("%s = v != v ? -%s : %sv;%s", lo, inf, cast, note)
	w.line("%s = v != v ? %s : %sv;", hi, inf, cast)
}

// cmp is the comparison that sends a row right.
func (pf *perfectForest) cmp() string {
	if pf.ge {
		return ">="
	}
	return ">"
}

// perfectBlock writes NAME_perfect, which scores one block of up to
// NAME_PF_ROWS rows.
func (g *gen) perfectBlock(w *printer, pf *perfectForest) {
	ft, u := g.ft, g.upper
	w.line("/* Scores the count <= %s_PF_ROWS rows at x into outs: writes each row's", u)
	w.line(" * keys, then tree by tree every row of the block takes %s_PF_DEPTH steps,", u)
	w.line(" * each a comparison and an addition (no branch on the data), and adds its")
	w.line(" * leaf, in tree order as %s_predict adds them. Up to %d lanes past count", g.name, pf.chains()-1)
	w.line(" * walk row 0 and are dropped. */")
	w.line("static void %s_perfect(const %s *x, size_t count, %s *outs)", g.name, ft, ft)
	w.line("{")
	w.in()
	w.line("%s sum[%s_PF_ROWS * %s_NUM_OUTPUTS];", g.at, u, u)
	w.line("%s key[%s_PF_ROWS * %s_PF_KEYS];", g.keyCType(pf), u, u)
	c := pf.chains()
	w.line("const size_t used = (count + %du) / %du * %du; /* whole chains */", c-1, c, c)
	w.line("size_t lane;")
	w.line("uint32_t tree;")
	w.line("int j;")
	g.perfectKeys(w, pf)
	g.perfectTrees(w, pf)
	g.batchFinish(w)
	w.out()
	w.line("}")
}

// perfectTrees writes the scalar walk of a block's rows through every tree.
func (g *gen) perfectTrees(w *printer, pf *perfectForest) {
	u := g.upper
	w.line("for (tree = 0; tree < %du; tree++) {", len(g.p.Trees))
	w.in()
	if pf.ord {
		w.line("const uint64_t *const nd = %s_pf_node + tree * %s_PF_INNER;", g.name, u)
	} else {
		w.line("const %s *const fe = %s_pf_feat + tree * %s_PF_INNER;", pf.featTyp, g.name, u)
		w.line("const %s *const th = %s_pf_thr + tree * %s_PF_INNER;", pf.keyType, g.name, u)
	}
	w.line("const %s *const lv = %s_pf_leaf + tree * (%s_PF_INNER + 1u) * %s_NUM_OUTPUTS;", g.at, g.name, u, u)
	w.line("for (lane = 0; lane < used; lane += %du) {", pf.chains())
	w.in()
	if pf.ord {
		g.perfectOrdChains(w, pf)
	} else {
		g.perfectChains(w, pf)
	}
	w.out()
	w.line("}")
	w.out()
	w.line("}")
}

// perfectKeys writes the loop that fills each row's keys and starts its
// sums.
func (g *gen) perfectKeys(w *printer, pf *perfectForest) {
	u, kt := g.upper, g.keyCType(pf)
	w.line("for (lane = 0; lane < used; lane++) {")
	w.in()
	w.line("const %s *const xr = x + (lane < count ? lane : 0u) * %s_NUM_FEATURES;", g.ft, u)
	lo, hi := "k[2 * j]", "k[2 * j + 1]"
	w.line("%s *const k = key + lane * %s_PF_KEYS;", kt, u)
	w.line("for (j = 0; j < %s_NUM_FEATURES; j++) {", u)
	w.in()
	w.line("const %s v = xr[j];", g.ft)
	if pf.ord {
		g.perfectOrdPair(w, pf, lo, hi)
	} else {
		g.keyPair(w, lo, hi, kt, " /* exact: see the thresholds */")
	}
	w.out()
	w.line("}")
	for j := 0; j < g.p.NumOutputs; j++ {
		w.line("sum[lane * %s_NUM_OUTPUTS + %du] = %s;", u, j, g.accStart(j))
	}
	w.out()
	w.line("}")
}

// perfectChains writes the walk of perfectChains rows through one tree
// (double keys), their steps interleaved and unrolled, and the addition of
// their leaves.
func (g *gen) perfectChains(w *printer, pf *perfectForest) {
	u := g.upper
	for c := 0; c < perfectChains; c++ {
		w.line("const %s *const k%d = key + (lane + %du) * %s_PF_KEYS;", g.keyCType(pf), c, c, u)
	}
	for c := 0; c < perfectChains; c++ {
		w.line("size_t i%d = 0u;", c)
	}
	for d := 0; d < pf.depth; d++ {
		for c := 0; c < perfectChains; c++ {
			w.line("i%d = 2u * i%d + 1u + (size_t)(k%d[fe[i%d]] %s th[i%d]);", c, c, c, c, pf.cmp(), c)
		}
	}
	g.perfectLeaves(w, perfectChains, u+"_PF_INNER")
}

// perfectLeaves writes the addition of chains rows' leaves, row c's at
// ic - below.
func (g *gen) perfectLeaves(w *printer, chains int, below string) {
	u := g.upper
	for c := 0; c < chains; c++ {
		if g.p.NumOutputs == 1 {
			w.line("sum[lane + %du] += lv[i%d - %s];", c, c, below)
			continue
		}
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", u)
		w.line("\tsum[(lane + %du) * %s_NUM_OUTPUTS + (size_t)j] += lv[(i%d - %s) * %s_NUM_OUTPUTS + (size_t)j];", c, u, c, below, u)
		w.line("}")
	}
}
