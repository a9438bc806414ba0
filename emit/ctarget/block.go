package ctarget

import (
	"fmt"
	"math"

	"github.com/sawmill-dev/sawmill/compile"
)

// Block is the layout whose NAME_predict_batch walks blocks of rows in
// lock-step with predication, after Asadi, Lin & de Vries ("Runtime
// optimizations for tree-based machine learning models", IEEE TKDE 2014).
// NAME_predict is the table layout's. For NAME_predict_batch every tree is
// stored once more as arrays of nodes in which a split's two children are
// neighbours and a leaf is its own child; a block of BlockRows rows takes,
// tree by tree, as many steps as the tree is deep, each step for every
// row of the block
//
//	node = child[node] + (x[f[node]] > t[node] || (isnan(x[f[node]]) && nanRight[node]))
//
// with no branch on the data (a leaf's threshold is +inf and NaN goes left
// there, so a row that reached a leaf stays on it). Where the compiler
// targets AVX2 (__AVX2__) the lanes of a step are vector gathers, compares
// and integer adds; elsewhere the same step is scalar. Both are comparisons
// and selections only: each row's leaves are added one by one in tree
// order, as NAME_predict adds them, so the outputs are bit for bit
// NAME_predict's on either path.
const Block = "block"

// BlockRows is the number of rows walked in lock-step: four AVX2 vectors of
// doubles, two of floats.
const BlockRows = 16

// blockMaxNodes bounds the forest's nodes so that node numbers and the
// child words (a node number shifted left by one) fit 32 bits.
const blockMaxNodes = 1 << 30

// blockEarlyDepth is the deepest forest whose blocks take every step of
// every tree: deeper, a block stops a tree once no lane moved, which cost
// 15% more instructions a row on a 500-tree depth-6 XGBoost model (79,181
// against 68,368) and saved 6% on a 100-tree fully grown scikit-learn forest
// of depth 24 to 37 (64,508 against 68,822; callgrind, gcc 12 -O2, x86-64).
const blockEarlyDepth = 12

// blockFits says why p cannot be written in the block layout, or nil. The
// layout handles numeric splits (<= and <, NaN to either side), float32
// sums, any number of outputs and every transform; it leaves to the table
// layout set splits, zero-as-missing and missing-value bands (a test more
// than one comparison), trees of one output among several, a < split at the lowest value
// (no <= test equals it) and forests of more than blockMaxNodes nodes.
func blockFits(g *gen) error {
	p := g.p
	if p.HasMissingValue {
		return fmt.Errorf("a missing-value band")
	}
	if p.NumNodes() > blockMaxNodes {
		return fmt.Errorf("%d nodes, more than %d", p.NumNodes(), blockMaxNodes)
	}
	for ti := range p.Trees {
		t := &p.Trees[ti]
		if g.scalarTree(ti) {
			return fmt.Errorf("tree %d adds to one output of %d", t.Source, p.NumOutputs)
		}
		for ni := range t.Nodes {
			n := &t.Nodes[ni]
			switch {
			case n.IsLeaf():
			case n.IsSetSplit():
				return fmt.Errorf("tree %d, node %d: a set split", t.Source, n.ID)
			case n.ZeroMissing:
				return fmt.Errorf("tree %d, node %d: zero counts as missing", t.Source, n.ID)
			default:
				if _, lt := g.normalise(n.Op, n.Threshold); lt {
					return fmt.Errorf("tree %d, node %d: x < %v has no <= form", t.Source, n.ID, n.Threshold)
				}
			}
		}
	}
	return nil
}

// blockForest is the forest as the block walk stores it.
type blockForest struct {
	feat  []int     // per node: the feature tested (0 at a leaf)
	thr   []float64 // per node: x goes right when x > thr (+inf at a leaf)
	kid   []uint32  // per node: the left child << 1 | NaN goes right (a leaf: itself << 1)
	val   []float64 // per node: the leaf value (0 at a split), one output
	row   []int     // per node: the leaf's row of rows (0 at a split), several outputs
	rows  *leafRows // the distinct leaf vectors, several outputs
	root  []int     // per tree: its root
	steps []int     // per tree: its depth, the steps every row takes
	// early: some tree is deeper than blockEarlyDepth, and a block stops
	// walking a tree once no lane moved in a step.
	early bool
}

// buildBlock numbers each tree's nodes breadth first, the two children of a
// split taking consecutive numbers.
func (g *gen) buildBlock() *blockForest {
	p := g.p
	b := &blockForest{}
	if p.NumOutputs > 1 {
		b.rows = g.distinctLeaves()
	}
	for ti := range p.Trees {
		t := &p.Trees[ti]
		base := len(b.feat)
		b.root = append(b.root, base)
		num := make([]int, len(t.Nodes))
		depth := make([]int, len(t.Nodes))
		order := []int32{0}
		num[0] = base
		deepest := 0
		for qi := 0; qi < len(order); qi++ {
			ni := order[qi]
			n := &t.Nodes[ni]
			deepest = max(deepest, depth[ni])
			if n.IsLeaf() {
				continue
			}
			next := base + len(order)
			num[n.Left], num[n.Right] = next, next+1
			depth[n.Left], depth[n.Right] = depth[ni]+1, depth[ni]+1
			order = append(order, n.Left, n.Right)
		}
		b.steps = append(b.steps, deepest)
		b.early = b.early || deepest > blockEarlyDepth
		for _, ni := range order {
			g.blockNode(b, ti, ni, num)
		}
	}
	return b
}

// blockNode appends node ni of tree ti, whose number is num[ni].
func (g *gen) blockNode(b *blockForest, ti int, ni int32, num []int) {
	n := &g.p.Trees[ti].Nodes[ni]
	if n.IsLeaf() {
		b.feat = append(b.feat, 0)
		b.thr = append(b.thr, math.Inf(1))
		b.kid = append(b.kid, uint32(num[ni])<<1)
		if b.rows != nil {
			b.row = append(b.row, b.rows.row(g.leaves[ti][ni]))
		} else {
			b.val = append(b.val, g.leaves[ti][ni][0])
		}
		return
	}
	th, _ := g.normalise(n.Op, n.Threshold)
	if th == 0 {
		th = 0 // x > -0 and x > 0 agree everywhere
	}
	nr := uint32(1)
	if n.MissingLeft {
		nr = 0
	}
	b.feat = append(b.feat, n.Feature)
	b.thr = append(b.thr, th)
	b.kid = append(b.kid, uint32(num[n.Left])<<1|nr)
	if b.rows != nil {
		b.row = append(b.row, 0)
	} else {
		b.val = append(b.val, 0)
	}
}

// block writes the table layout's NAME_predict and arranges for the block
// walk's tables and NAME_predict_batch to follow.
func (g *gen) block(w *printer) error {
	if err := g.table(w); err != nil {
		return err
	}
	b := g.buildBlock()
	g.batch = func(w *printer) {
		g.blockTables(w, b)
		g.blockBatch(w, b)
	}
	return nil
}

// blockTables writes the node arrays and the per-tree roots and steps.
func (g *gen) blockTables(w *printer, b *blockForest) {
	thr := func(i int) string {
		if math.IsInf(b.thr[i], 1) {
			return map[string]string{"double": "HUGE_VAL", "float": "HUGE_VALF"}[g.ft]
		}
		return g.lit(b.thr[i])
	}
	g.blockNodes(w, b, thr)
	if b.rows == nil {
		g.bvArray(w, g.at, "bk_val", "block walk: each node's leaf value (0 at a split)", len(b.val), func(i int) string { return g.alit(b.val[i]) })
	} else {
		g.blockLeaves(w, b)
	}
	g.bvArray(w, "uint32_t", "bk_root", "block walk: each tree's root", len(b.root), func(i int) string { return fmt.Sprintf("%du", b.root[i]) })
	g.bvArray(w, "uint32_t", "bk_steps", "block walk: each tree's depth", len(b.steps), func(i int) string { return fmt.Sprintf("%du", b.steps[i]) })
}

// blockNodes writes the nodes, one struct each (a threshold and two words:
// 16 bytes in double, 12 in float, so that a node is one load of one cache
// line), and a check of that size, which the AVX2 gathers count on.
func (g *gen) blockNodes(w *printer, b *blockForest, thr func(int) string) {
	size := map[string]int{"double": 16, "float": 12}[g.ft]
	w.line("/* block walk: per node, x goes right when x > thr (+inf at a leaf); feat,")
	w.line(" * the feature (0 at a leaf); kid, the left child << 1 | NaN goes right (a")
	w.line(" * leaf: itself << 1). */")
	w.line("struct %s_bk_node {", g.name)
	w.line("	%s thr;", g.ft)
	w.line("	uint32_t feat, kid;")
	w.line("};")
	w.line("typedef char %s_bk_node_is_%d_bytes[sizeof(struct %s_bk_node) == %d ? 1 : -1];", g.name, size, g.name, size)
	w.line("static const struct %s_bk_node %s_bk_nodes[%d] = {", g.name, g.name, len(b.feat))
	for i := range b.feat {
		w.line("	{%s, %d, %du}%s", thr(i), b.feat[i], b.kid[i], comma(i, len(b.feat)))
	}
	w.line("};")
	w.line("")
	g.tables = append(g.tables, Table{Name: g.name + "_bk_nodes", What: "block walk: threshold, feature, child word", Len: len(b.feat), ElemBytes: size})
}

// blockLeaves writes the distinct leaf vectors and each node's row of them.
func (g *gen) blockLeaves(w *printer, b *blockForest) {
	w.line("/* block walk: distinct leaf vectors */")
	w.line("static const %s %s_bk_leaf[%d][%s_NUM_OUTPUTS] = {", g.at, g.name, len(b.rows.vecs), g.upper)
	for i, v := range b.rows.vecs {
		w.line("\t{%s}%s", g.joinLits(v), comma(i, len(b.rows.vecs)))
	}
	w.line("};")
	w.line("")
	g.tables = append(g.tables, Table{Name: g.name + "_bk_leaf", What: "block walk: distinct leaf vectors", Len: len(b.rows.vecs) * g.p.NumOutputs, ElemBytes: g.elemBytes()})
	g.bvArray(w, "uint32_t", "bk_row", "block walk: each node's row of "+g.name+"_bk_leaf (0 at a split)", len(b.row), func(i int) string { return fmt.Sprintf("%du", b.row[i]) })
}

// blockBatch writes NAME_block (one block of up to BlockRows rows) and
// NAME_predict_batch, its loop over the blocks.
func (g *gen) blockBatch(w *printer, b *blockForest) {
	ft, nf, no := g.ft, g.upper+"_NUM_FEATURES", g.upper+"_NUM_OUTPUTS"
	w.line("#define %s_BLOCK %d", g.upper, BlockRows)
	w.line("")
	g.blockSimd(w)
	w.line("/* Scores the count <= %s_BLOCK rows at x into outs: tree by tree, every row", g.upper)
	w.line(" * of the block taking the tree's depth in steps, each a comparison and an")
	w.line(" * addition (no branch on the data); then each row's leaves are added in")
	w.line(" * tree order, as %s_predict adds them. Lanes past count walk row 0 and are", g.name)
	w.line(" * dropped. */")
	w.line("static void %s_block(const %s *x, size_t count, %s *outs)", g.name, ft, ft)
	w.line("{")
	w.in()
	w.line("%s sum[%s_BLOCK * %s];", g.at, g.upper, no)
	w.line("uint32_t node[%s_BLOCK], off[%s_BLOCK];", g.upper, g.upper)
	w.line("uint32_t tree, step, lane;")
	w.line("int j;")
	w.line("for (lane = 0; lane < %s_BLOCK; lane++) {", g.upper)
	w.line("\toff[lane] = lane < count ? lane * (uint32_t)%s : 0u;", nf)
	for j := 0; j < g.p.NumOutputs; j++ {
		w.line("\tsum[lane * %s + %du] = %s;", no, j, g.accStart(j))
	}
	w.line("}")
	w.line("for (tree = 0; tree < %du; tree++) {", len(b.root))
	w.in()
	w.line("const uint32_t steps = %s_bk_steps[tree];", g.name)
	w.line("for (lane = 0; lane < %s_BLOCK; lane++) {", g.upper)
	w.line("\tnode[lane] = %s_bk_root[tree];", g.name)
	w.line("}")
	w.line("for (step = 0; step < steps; step++) {")
	if b.early {
		w.line("\tif (%s_step(x, off, node) == 0u) {", g.name)
		w.line("\t\tbreak; /* every lane is on a leaf */")
		w.line("\t}")
	} else {
		w.line("\t(void)%s_step(x, off, node); /* shallow trees: every step, no test */", g.name)
	}
	w.line("}")
	g.blockAdd(w, b)
	w.out()
	w.line("}")
	g.batchFinish(w)
	w.out()
	w.line("}")
	g.blockLoop(w, "block", "BLOCK")
}

// batchFinish writes the end of a block function: each of its count rows'
// sums (sum, NAME_NUM_OUTPUTS apart) finished into outs.
func (g *gen) batchFinish(w *printer) {
	ft, no := g.ft, g.upper+"_NUM_OUTPUTS"
	w.line("for (lane = 0; lane < count; lane++) {")
	w.in()
	w.line("%s acc[%s];", g.at, no)
	w.line("%s *const out = outs + lane * %s;", ft, no)
	w.line("for (j = 0; j < %s; j++) {", no)
	w.line("\tacc[j] = sum[lane * %s + (uint32_t)j];", no)
	w.line("}")
	g.finishBody(w)
	w.out()
	w.line("}")
}

// blockLoop writes NAME_predict_batch: whole blocks of NAME_<rows> rows,
// each through NAME_<fn>, then the rest as one part block, or through
// NAME_predict when under a quarter block.
func (g *gen) blockLoop(w *printer, fn, rows string) {
	ft, nf, no := g.ft, g.upper+"_NUM_FEATURES", g.upper+"_NUM_OUTPUTS"
	w.line("")
	w.line("void %s_predict_batch(const %s *x, size_t n, %s *outs)", g.name, ft, ft)
	w.line("{")
	w.line("\tsize_t r;")
	w.line("\tfor (r = 0; r + %s_%s <= n; r += %s_%s) {", g.upper, rows, g.upper, rows)
	w.line("\t\t%s_%s(x + r * %s, %s_%s, outs + r * %s);", g.name, fn, nf, g.upper, rows, no)
	w.line("\t}")
	w.line("\tif (n - r >= %s_%s / 4u) { /* a part block, its idle lanes on row 0 */", g.upper, rows)
	w.line("\t\t%s_%s(x + r * %s, n - r, outs + r * %s);", g.name, fn, nf, no)
	w.line("\t\treturn;")
	w.line("\t}")
	w.line("\tfor (; r < n; r++) { /* under a quarter block: one by one, the same bits */")
	w.line("\t\t%s_predict(x + r * %s, outs + r * %s);", g.name, nf, no)
	w.line("\t}")
	w.line("}")
}

// blockAdd writes the addition of the leaf each lane reached.
func (g *gen) blockAdd(w *printer, b *blockForest) {
	w.line("for (lane = 0; lane < %s_BLOCK; lane++) {", g.upper)
	if b.rows == nil {
		w.line("\tsum[lane] += %s_bk_val[node[lane]];", g.name)
	} else {
		w.line("\tconst %s *const lv = %s_bk_leaf[%s_bk_row[node[lane]]];", g.at, g.name, g.name)
		w.line("\tfor (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("\t\tsum[lane * %s_NUM_OUTPUTS + (uint32_t)j] += lv[j];", g.upper)
		w.line("\t}")
	}
	w.line("}")
}

// blockSimd writes NAME_step, one step of every lane: AVX2 gathers under
// __AVX2__, else a scalar loop; both compute the same node numbers.
func (g *gen) blockSimd(w *printer) {
	ft := g.ft
	w.line("/* One step of every lane: node = child + (goes right); nonzero when a lane")
	w.line(" * moved, so that a block whose lanes all reached leaves stops early. Kept out of line")
	w.line(" * (GNU C), which leaves it the registers it needs: inlined into the block")
	w.line(" * loop, gcc 12 -O2 spilled them to the stack (68,368 instructions a row")
	w.line(" * against 105,966 on a 500-tree depth-6 model). */")
	w.line("#if defined(__GNUC__)")
	w.line("__attribute__((noinline))")
	w.line("#endif")
	w.line("static uint32_t %s_step(const %s *x, const uint32_t *off, uint32_t *node)", g.name, ft)
	w.line("{")
	w.line("#if defined(__AVX2__)")
	w.in()
	if ft == "double" {
		g.blockAVX2Double(w)
	} else {
		g.blockAVX2Float(w)
	}
	w.out()
	w.line("#else")
	w.in()
	w.line("uint32_t l, moved = 0u;")
	w.line("for (l = 0; l < %s_BLOCK; l++) {", g.upper)
	w.in()
	w.line("const struct %s_bk_node *const nd = &%s_bk_nodes[node[l]];", g.name, g.name)
	w.line("const %s v = x[off[l] + nd->feat];", ft)
	w.line("const uint32_t right = (uint32_t)(v > nd->thr) | ((uint32_t)(v != v) & nd->kid);")
	w.line("const uint32_t next = (nd->kid >> 1) + (right & 1u);")
	w.line("moved |= next ^ node[l];")
	w.line("node[l] = next;")
	w.out()
	w.line("}")
	w.line("return moved;")
	w.out()
	w.line("#endif")
	w.line("}")
	w.line("")
}

// blockAVX2Double writes the AVX2 step for doubles: four lanes a vector,
// node numbers and offsets widened to 64 bits for the gathers.
func (g *gen) blockAVX2Double(w *printer) {
	w.line("const __m256i one = _mm256_set1_epi64x(1), two = _mm256_set1_epi64x(2), three = _mm256_set1_epi64x(3);")
	w.line("const int *const words = (const int *)(const void *)%s_bk_nodes;", g.name)
	w.line("__m256i moved = _mm256_setzero_si256();")
	w.line("uint32_t v;")
	w.line("for (v = 0; v < %s_BLOCK; v += 4u) {", g.upper)
	w.in()
	w.line("const __m256i nd = _mm256_cvtepu32_epi64(_mm_loadu_si128((const __m128i *)(const void *)(node + v)));")
	w.line("const __m256i of = _mm256_cvtepu32_epi64(_mm_loadu_si128((const __m128i *)(const void *)(off + v)));")
	w.line("const __m256i n4 = _mm256_slli_epi64(nd, 2); /* the node's first int */")
	w.line("const __m256i k = _mm256_cvtepu32_epi64(_mm256_i64gather_epi32(words, _mm256_add_epi64(n4, three), 4));")
	w.line("const __m256i f = _mm256_cvtepu32_epi64(_mm256_i64gather_epi32(words, _mm256_add_epi64(n4, two), 4));")
	w.line("const __m256d xv = _mm256_i64gather_pd(x, _mm256_add_epi64(of, f), 8);")
	w.line("const __m256d th = _mm256_i64gather_pd((const double *)(const void *)%s_bk_nodes, _mm256_slli_epi64(nd, 1), 8);", g.name)
	w.line("const __m256i gt = _mm256_castpd_si256(_mm256_cmp_pd(xv, th, _CMP_GT_OQ));")
	w.line("const __m256i un = _mm256_castpd_si256(_mm256_cmp_pd(xv, xv, _CMP_UNORD_Q));")
	w.line("const __m256i nr = _mm256_sub_epi64(_mm256_setzero_si256(), _mm256_and_si256(k, one));")
	w.line("const __m256i right = _mm256_or_si256(gt, _mm256_and_si256(un, nr));")
	w.line("const __m256i next = _mm256_sub_epi64(_mm256_srli_epi64(k, 1), right);")
	w.line("moved = _mm256_or_si256(moved, _mm256_xor_si256(next, nd));")
	w.line("/* the low 32 bits of each 64-bit lane, in order */")
	w.line("const __m256i packed = _mm256_permutevar8x32_epi32(next, _mm256_setr_epi32(0, 2, 4, 6, 0, 2, 4, 6));")
	w.line("_mm_storeu_si128((__m128i *)(void *)(node + v), _mm256_castsi256_si128(packed));")
	w.out()
	w.line("}")
	w.line("return (uint32_t)(_mm256_testz_si256(moved, moved) == 0);")
}

// blockAVX2Float writes the AVX2 step for floats: eight lanes a vector.
func (g *gen) blockAVX2Float(w *printer) {
	w.line("const __m256i one = _mm256_set1_epi32(1), two = _mm256_set1_epi32(2);")
	w.line("const int *const words = (const int *)(const void *)%s_bk_nodes;", g.name)
	w.line("__m256i moved = _mm256_setzero_si256();")
	w.line("uint32_t v;")
	w.line("for (v = 0; v < %s_BLOCK; v += 8u) {", g.upper)
	w.in()
	w.line("const __m256i nd = _mm256_loadu_si256((const __m256i *)(const void *)(node + v));")
	w.line("const __m256i of = _mm256_loadu_si256((const __m256i *)(const void *)(off + v));")
	w.line("const __m256i n3 = _mm256_add_epi32(_mm256_slli_epi32(nd, 1), nd); /* the node's first word */")
	w.line("const __m256i k = _mm256_i32gather_epi32(words, _mm256_add_epi32(n3, two), 4);")
	w.line("const __m256i f = _mm256_i32gather_epi32(words, _mm256_add_epi32(n3, one), 4);")
	w.line("const __m256 xv = _mm256_i32gather_ps(x, _mm256_add_epi32(of, f), 4);")
	w.line("const __m256 th = _mm256_i32gather_ps((const float *)(const void *)%s_bk_nodes, n3, 4);", g.name)
	w.line("const __m256i gt = _mm256_castps_si256(_mm256_cmp_ps(xv, th, _CMP_GT_OQ));")
	w.line("const __m256i un = _mm256_castps_si256(_mm256_cmp_ps(xv, xv, _CMP_UNORD_Q));")
	w.line("const __m256i nr = _mm256_sub_epi32(_mm256_setzero_si256(), _mm256_and_si256(k, one));")
	w.line("const __m256i right = _mm256_or_si256(gt, _mm256_and_si256(un, nr));")
	w.line("const __m256i next = _mm256_sub_epi32(_mm256_srli_epi32(k, 1), right);")
	w.line("moved = _mm256_or_si256(moved, _mm256_xor_si256(next, nd));")
	w.line("_mm256_storeu_si256((__m256i *)(void *)(node + v), next);")
	w.out()
	w.line("}")
	w.line("return (uint32_t)(_mm256_testz_si256(moved, moved) == 0);")
}

// blockResolve is Resolve's answer when the block layout is asked for.
func blockResolve(p *compile.Program, o Options) (string, string) {
	g := &gen{p: p, o: o}
	if err := blockFits(g); err != nil {
		return "table", fmt.Sprintf("block asked for, but %v: the table layout instead", err)
	}
	return Block, "asked for"
}
