package ctarget

import (
	"fmt"
	"math"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
)

// Block is the layout whose NAME_predict_batch walks blocks of rows tree by
// tree with no branch on the data, for trees of any depth (after Asadi, Lin
// & de Vries, "Runtime optimizations for tree-based machine learning
// models", IEEE TKDE 2014). NAME_predict is the table layout's.
//
// A block of rows (see blockRows) first writes each row's keys as the
// perfect walk does: per feature the input with NaN as -inf (key 2f) and as
// +inf (key 2f+1), and one more key, -inf, which leaves point at. Every
// tree is stored once more as three arrays (blockNodes): per node a key
// index (feature << 1 | NaN goes right), a threshold and a child number
// counted from the tree's root, the two children of a split next to each
// other, numbered in pairs depth first (pairOrder); a leaf is its own
// child and compares the -inf key with +inf, which never sends a row on.
// A step is
//
//	i = kid[i] + (key[k[i]] > th[i])
//
// (>= where every split is a <), eight rows' steps interleaved and unrolled
// in the code. Shallow trees take their depth in steps; deeper ones stop
// once the sum of the eight rows' node numbers stayed put over a step
// (blockCheckDepth, blockWalkUntilStill).
// Keys and thresholds are floats where that decides every split as the
// double comparison would (floatExact). Each row's leaves are added in
// tree order, so the outputs are NAME_predict's bit for bit.
const Block = "block"

// BlockMaxRows is the most rows a block walks together: every block reads
// the trees' nodes again, so more rows a block read them fewer times.
const BlockMaxRows = 128

// blockKeyBytes bounds a block's keys on the stack.
const blockKeyBytes = 32768

// blockBigNodes is the size of node tables (bytes) past which a forest is
// taken not to fit the second-level cache: every block then streams the
// forest from memory, so blocks take up to blockBigRows rows and
// blockBigKeyBytes of keys. On the 100-tree fully grown forest of
// bench/libs/run.sh (3.4 MB of nodes) 1,024-row blocks took 2,597 and
// 2,763 ns a row against 128-row blocks' 3,837 and 4,575 (10,000-row
// batches, best of 3, alternating runs, load average 1.7 on 2 cores).
const blockBigNodes = 1 << 20

// blockBigRows and blockBigKeyBytes are BlockMaxRows and blockKeyBytes for
// forests past blockBigNodes: a thread needs 256 KiB of stack for the keys
// (glibc's default thread stack is 8 MiB; musl's 128 KiB is too small).
const (
	blockBigRows     = 1024
	blockBigKeyBytes = 262144
)

// blockChains is the number of rows whose steps are interleaved.
const blockChains = 8

// BlockMaxFeatures bounds the features, so that the key indexes (2f+1 at
// most, and the -inf key) fit 16 bits and eight rows' keys blockKeyBytes.
const BlockMaxFeatures = 255

// blockMaxNodes bounds the forest's nodes so that node numbers fit 32 bits.
const blockMaxNodes = 1 << 30

// blockCheckDepth is the deepest tree walked to its depth without a test:
// deeper, the eight rows stop once the sum of their node numbers stayed
// the same over a step (blockWalkUntilStill). On the 500-round 63-leaf
// LightGBM model of bench/libs/run.sh (trees 8 to 23 deep; a group of
// eight rows walked 11.7 steps a tree under the earlier test, each row
// 4.5 steps to its leaf, the deepest of the eight 9.4) that test took
// 45,086 instructions a row against 58,407 for the earlier one (eight
// copies and eight xors every 2 steps), and 3,697 ns a row against 4,794
// (callgrind, gcc 12 -O2, 1,000 rows; best of 5, 10,000 rows, A/B
// interleaved).
const blockCheckDepth = 8

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
	key     []uint32  // per node: (feature << 1 | NaN goes right) * blockChains (a leaf: the -inf key's)
	thr     []float64 // per node: the row goes right when its key exceeds this (+inf at a leaf)
	kid     []uint32  // per node: the left child, counted from the tree's root (a leaf: itself)
	val     []float64 // per node: the leaf value (0 at a split), one output
	row     []int     // per node: the leaf's row of rows (0 at a split), several outputs
	rows    *leafRows // the distinct leaf vectors, several outputs
	root    []int     // per tree: its root
	steps   []int     // per tree: its depth
	biggest int       // the most nodes of a tree
	ge      bool      // a row goes right when key >= thr (every split a <), else key > thr
	// keyType is the C type of keys and thresholds: float where that is
	// exact at every split (floatExact), else uint16_t, ranks (see
	// blockRanks), else the arithmetic's type.
	keyType string
	ranks   *blockRankKeys // the rank keys' tables, where keyType is uint16_t
	kidTyp  string         // the child number's type: uint8_t, uint16_t or uint32_t
	rows8   int            // a block's rows: see blockRows
	chain   *blockChain    // the chained walk's chunks (chain.go), or nil: the lockstep walk
}

// blockRows is the rows of a block: as many as blockKeyBytes of keys hold
// (keys a row, keyBytes each), a multiple of blockChains, at most
// BlockMaxRows.
func blockRows(keys, keyBytes int) int {
	r := blockKeyBytes / (keys * keyBytes) / blockChains * blockChains
	return max(blockChains, min(BlockMaxRows, r))
}

// blockRowsBig is blockRows for forests past blockBigNodes.
func blockRowsBig(keys, keyBytes int) int {
	r := blockBigKeyBytes / (keys * keyBytes) / blockChains * blockChains
	return max(blockChains, min(blockBigRows, r))
}

// buildBlock numbers each tree's nodes in pairs depth first (pairOrder).
func (g *gen) buildBlock() *blockForest {
	p := g.p
	b := &blockForest{ge: allLT(p)}
	if p.NumOutputs > 1 {
		b.rows = g.distinctLeaves()
	}
	biggest := 0
	for ti := range p.Trees {
		t := &p.Trees[ti]
		base := len(b.key)
		b.root = append(b.root, base)
		biggest = max(biggest, len(t.Nodes))
		num := make([]int, len(t.Nodes))
		order := pairOrder(t, num)
		b.steps = append(b.steps, treeDepth(t, 0, 0))
		for _, ni := range order {
			g.blockNode(b, ti, ni, num)
		}
	}
	b.biggest = biggest
	g.blockTypes(b, biggest)
	if b.chainable() {
		chunk := blockChunkBytes
		if g.o.BlockChunkBytes > 0 {
			chunk = g.o.BlockChunkBytes
		}
		g.chain(b, chunk)
	}
	g.blockSetRows(b)
	return b
}

// pairOrder orders tree t's nodes for the block walk and writes each
// node's number in num: the root, then the two children of a split
// together, the left child's subtree before the right's (depth first, a
// split's children after it, so that a step never lowers a node number).
// A row's path deep in a fully grown tree then stays on nearby cache
// lines: on the 100-tree fully grown forest of bench/libs/run.sh this
// order took 3,922 to 4,175 ns a row against breadth first's 5,186 to
// 5,412 (10,000 rows, best of 3, A/B interleaved, three runs, load
// average 2.2 on 2 cores); on the LightGBM model, whose trees fit the
// first-level cache, the two were within noise.
func pairOrder(t *compile.Tree, num []int) []int32 {
	order := []int32{0}
	stack := []int32{0}
	for len(stack) > 0 {
		n := &t.Nodes[stack[len(stack)-1]]
		stack = stack[:len(stack)-1]
		if n.IsLeaf() {
			continue
		}
		num[n.Left], num[n.Right] = len(order), len(order)+1
		order = append(order, n.Left, n.Right)
		stack = append(stack, n.Right, n.Left)
	}
	return order
}

// blockTypes chooses the key type (float where exact) and the child
// number's type: 4 bytes where the trees are chained (numbers count from
// the forest's first node), else the biggest tree's size.
func (g *gen) blockTypes(b *blockForest, biggest int) {
	b.keyType = g.keyType(b.thr, b.ge)
	if b.keyType != "float" {
		if b.ranks = g.blockRanks(b); b.ranks != nil {
			b.keyType = "uint16_t"
		}
	}
	switch {
	case b.chainable():
		b.kidTyp = "uint32_t"
	case biggest <= 256:
		b.kidTyp = "uint8_t"
	case biggest <= 65536:
		b.kidTyp = "uint16_t"
	default:
		b.kidTyp = "uint32_t"
	}
}

// blockSetRows chooses a block's rows from the keys' and the nodes' sizes.
func (g *gen) blockSetRows(b *blockForest) {
	keys := 2*len(g.p.Features) + 1
	kb := bvElemBytes(b.keyType, 8)
	b.rows8 = blockRows(keys, kb)
	if b.big() {
		b.rows8 = blockRowsBig(keys, kb)
	}
}

// blockLeafKey is the key index every leaf has: the -inf key after each
// feature's two, times the chains.
func (g *gen) blockLeafKey() uint32 {
	return uint32(2 * len(g.p.Features) * blockChains)
}

// blockNode appends node ni of tree ti, whose number from the root is
// num[ni].
func (g *gen) blockNode(b *blockForest, ti int, ni int32, num []int) {
	n := &g.p.Trees[ti].Nodes[ni]
	if n.IsLeaf() {
		b.key = append(b.key, g.blockLeafKey())
		b.thr = append(b.thr, math.Inf(1))
		b.kid = append(b.kid, uint32(num[ni]))
		if b.rows != nil {
			b.row = append(b.row, b.rows.row(g.leaves[ti][ni]))
		} else {
			b.val = append(b.val, g.leaves[ti][ni][0])
		}
		return
	}
	th := n.Threshold
	if !b.ge {
		th, _ = g.normalise(n.Op, n.Threshold)
	}
	if th == 0 {
		th = 0 // x > -0 and x > 0 agree everywhere, as do x >= -0 and x >= 0
	}
	k := uint32(n.Feature) << 1
	if !n.MissingLeft {
		k |= 1
	}
	b.key = append(b.key, k*blockChains)
	b.thr = append(b.thr, th)
	b.kid = append(b.kid, uint32(num[n.Left]))
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
		if b.chain != nil {
			g.chainBatch(w, b)
		} else {
			g.blockBatch(w, b)
		}
		g.blockLoopFrom(w, "block", "BK_ROWS", fmt.Sprintf("%du", blockChains), "under eight rows")
	}
	return nil
}

// blockTables writes the nodes, the leaves and the per-tree roots and
// steps.
func (g *gen) blockTables(w *printer, b *blockForest) {
	kb := blockKeyBytes
	if b.rows8 > BlockMaxRows {
		kb = blockBigKeyBytes
	}
	w.line("#define %s_BK_ROWS %du /* a block's rows: %d bytes of keys at most */", g.upper, b.rows8, kb)
	w.line("#define %s_BK_KEYS (2u * %s_NUM_FEATURES + 1u) /* a row's keys: each feature with NaN as -inf, then as +inf; then -inf */", g.upper, g.upper)
	w.line("")
	g.blockNodes(w, b)
	if b.ranks != nil {
		g.blockRankTables(w, b.ranks)
		g.blockRankSearch(w, b.ge)
	}
	if b.rows == nil {
		what := "block walk: each node's leaf value (0 at a split)"
		if b.chain != nil {
			what = "chained block walk: each node's leaf value (-0.0 at a split and the stop node)"
		}
		g.bvArray(w, g.at, "bk_val", what, len(b.val), func(i int) string { return g.alit(b.val[i]) })
	} else {
		g.blockLeaves(w, b)
	}
	if b.chain != nil {
		g.chainTables(w, b)
		return
	}
	if b.big() {
		g.blockFetch(w)
	}
	g.bvArray(w, "uint32_t", "bk_root", "block walk: each tree's root", len(b.root), func(i int) string { return fmt.Sprintf("%du", b.root[i]) })
	g.bvArray(w, "uint32_t", "bk_steps", "block walk: each tree's depth", len(b.steps), func(i int) string { return fmt.Sprintf("%du", b.steps[i]) })
}

// blockNodes writes the nodes as three arrays (child number, threshold,
// key index), each indexed by the node's number from its tree's root
// through a pointer to the tree's first node. A step then takes five
// instructions (gcc 12 -O2, x86-64: the key index, the key, a compare with
// the threshold in memory, the child number, an add with carry), each
// load addressed by the node number scaled in the instruction, against six
// for 8-byte nodes {threshold, child, key index}, whose address took an
// lea of its own: on the LightGBM model of bench/libs/run.sh the block
// walk ran 40,218 instructions a row in three arrays against 45,086 in
// nodes (callgrind, 1,000 rows), and the child numbers take 1 byte there
// (trees of 125 nodes) where a node took 8.
func (g *gen) blockNodes(w *printer, b *blockForest) {
	inf := hugeVal(b.keyType)
	thr := func(i int) string {
		t := b.thr[i]
		switch {
		case b.ranks != nil:
			return fmt.Sprintf("%du", int(t))
		case math.IsInf(t, 0):
			return map[bool]string{true: "", false: "-"}[t > 0] + inf
		case b.keyType == "float":
			return floatLit(t)
		}
		return doubleLit(t)
	}
	w.line("/* block walk, per node: the row goes right when key[bk_k] %s bk_thr;", b.cmp())
	kidWhat := "block walk: each node's left child, counted from its tree's root"
	if b.chain != nil {
		kidWhat = "chained block walk: each node's left child (a leaf: the next tree's root or the stop node)"
		w.line(" * bk_kid is the left child (a leaf: the next tree's root in its chunk,")
		w.line(" * else the stop node; a leaf has a threshold no key passes and the")
		w.line(" * leaves' key). */")
	} else {
		w.line(" * bk_kid is the left child counted from the tree's root (a leaf: itself,")
		w.line(" * with a threshold no key passes and the leaves' key). */")
	}
	g.bvArray(w, b.kidTyp, "bk_kid", kidWhat, len(b.kid), func(i int) string { return fmt.Sprintf("%du", b.kid[i]) })
	g.bvArray(w, b.keyType, "bk_thr", "block walk: each node's threshold", len(b.thr), thr)
	g.bvArray(w, "uint16_t", "bk_k", "block walk: each node's key index (feature << 1 | NaN goes right, times 8)", len(b.key), func(i int) string { return fmt.Sprintf("%du", b.key[i]) })
}

// nodeBytes is the size of a node in the three arrays.
func (b *blockForest) nodeBytes() int {
	return bvElemBytes(b.kidTyp, 8) + bvElemBytes(b.keyType, 8) + 2
}

// cmp is the comparison that sends a row right: ranks compare with >.
func (b *blockForest) cmp() string {
	if b.ge && b.ranks == nil {
		return ">="
	}
	return ">"
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
	g.bvArray(w, leafRowType(len(b.rows.vecs)), "bk_row", "block walk: each node's row of "+g.name+"_bk_leaf (0 at a split)", len(b.row), func(i int) string { return fmt.Sprintf("%du", b.row[i]) })
}

// leafRowType is the smallest type that numbers n leaf vectors. A
// classification forest has few distinct vectors, and the table of each
// node's row is read once a row a tree: on the 100-tree fully grown forest
// of bench/libs/run.sh (4 vectors) 1-byte rows took 2,141 to 2,291 ns a
// row against 4-byte rows' 2,461 to 2,728 (1.14 to 1.24 times, six A/B
// runs, best of 3, 10,000 rows, load average 2.7).
func leafRowType(n int) string {
	switch {
	case n <= 256:
		return "uint8_t"
	case n <= 65536:
		return "uint16_t"
	}
	return "uint32_t"
}

// blockBatch writes NAME_block, which scores one block of up to
// NAME_BK_ROWS rows.
func (g *gen) blockBatch(w *printer, b *blockForest) {
	u := g.upper
	w.line("/* Scores the count <= %s_BK_ROWS rows at x into outs: writes each row's", u)
	w.line(" * keys, then tree by tree eight rows at a time take the tree's depth in")
	w.line(" * steps, each a comparison and an addition (no branch on the data; trees")
	w.line(" * deeper than %d stop once the eight rows sat still for a step), and add", blockCheckDepth)
	w.line(" * their leaves, in tree order as %s_predict adds them. Up to %d lanes past", g.name, blockChains-1)
	w.line(" * count walk row 0 and are dropped. */")
	g.blockHead(w, b, "tree")
	w.line("for (tree = 0; tree < %du; tree++) {", len(g.p.Trees))
	w.in()
	w.line("const uint32_t root = %s_bk_root[tree];", g.name)
	w.line("const %s *const kid = %s_bk_kid + root; /* the tree's nodes */", b.kidTyp, g.name)
	w.line("const %s *const thr = %s_bk_thr + root;", b.keyType, g.name)
	w.line("const uint16_t *const kix = %s_bk_k + root;", g.name)
	w.line("const uint32_t steps = %s_bk_steps[tree];", g.name)
	if b.big() {
		g.blockPrefetchNext(w, b)
	}
	g.blockLanes(w, func() { g.blockChains(w, b) })
}

// blockLanes writes the end of NAME_block: the loop over the block's
// groups of blockChains rows, whose walk chains writes, the end of the
// loop over trees or chunks around it, and the rows' finish.
func (g *gen) blockLanes(w *printer, chains func()) {
	w.line("for (lane = 0; lane < used; lane += %du) {", blockChains)
	w.in()
	chains()
	w.out()
	w.line("}")
	w.out()
	w.line("}")
	g.batchFinish(w)
	w.out()
	w.line("}")
}

// big says whether the forest's nodes are taken not to fit the
// second-level cache (blockBigNodes): blocks are then bigger, and each
// tree's nodes are fetched while the tree before it is walked.
func (b *blockForest) big() bool {
	return len(b.key)*b.nodeBytes() > blockBigNodes
}

// blockPrefetchNext writes, in the lockstep walk of a forest past
// blockBigNodes, the request that the next tree's nodes come toward the
// second-level cache while this tree is walked (NAME_bk_fetch), so that
// the next tree's first steps do not each wait on memory. On the
// 1,000-tree fully grown forest of bench/libs/run.sh (4.2M nodes, 38 KB
// a tree) it took 24,624 to 25,303 ns a row against 28,018 to 28,341
// (10,000 rows, best of 3, three alternating runs, load average 1 to 1.6;
// the same with prefetches toward the first-level cache).
func (g *gen) blockPrefetchNext(w *printer, b *blockForest) {
	n := len(g.p.Trees)
	w.line("if (tree + 1u < %du) { /* the next tree's nodes, fetched while this one is walked */", n)
	w.in()
	w.line("const uint32_t next = %s_bk_root[tree + 1u];", g.name)
	w.line("const uint32_t end = tree + 2u < %du ? %s_bk_root[tree + 2u] : %du;", n, g.name, len(b.key))
	for _, a := range b.arrays() {
		w.line("%s_bk_fetch(%s_%s + next, %s_%s + end);", g.name, g.name, a, g.name, a)
	}
	w.out()
	w.line("}")
}

// arrays is the node arrays the lockstep walk reads, by name suffix.
func (b *blockForest) arrays() []string {
	leaf := "bk_val"
	if b.rows != nil {
		leaf = "bk_row"
	}
	return []string{"bk_kid", "bk_thr", "bk_k", leaf}
}

// blockFetch writes NAME_bk_fetch, which asks for the bytes from start to
// end toward the second-level cache a 64-byte line at a time (gcc's and
// clang's __builtin_prefetch, locality 2; elsewhere it does nothing): a
// hint, which changes no result.
func (g *gen) blockFetch(w *printer) {
	w.line("/* Asks for the bytes from start to end toward the second-level cache (a")
	w.line(" * hint: no result depends on it). */")
	w.line("static void %s_bk_fetch(const void *start, const void *end)", g.name)
	w.line("{")
	w.line("#if defined(__GNUC__)")
	w.line("	const char *p;")
	w.line("	for (p = (const char *)start; p < (const char *)end; p += 64) {")
	w.line("		__builtin_prefetch(p, 0, 2);")
	w.line("	}")
	w.line("#else")
	w.line("	(void)start;")
	w.line("	(void)end;")
	w.line("#endif")
	w.line("}")
	w.line("")
}

// blockHead writes NAME_block's signature, its locals (counter the
// outer loop's) and the loop that fills the keys and starts the sums.
func (g *gen) blockHead(w *printer, b *blockForest, counter string) {
	ft, u := g.ft, g.upper
	w.line("static void %s_block(const %s *x, size_t count, %s *outs)", g.name, ft, ft)
	w.line("{")
	w.in()
	w.line("%s sum[%s_BK_ROWS * %s_NUM_OUTPUTS];", g.at, u, u)
	w.line("%s key[%s_BK_ROWS * %s_BK_KEYS];", b.keyType, u, u)
	w.line("const size_t used = (count + %du) / %du * %du; /* whole chains */", blockChains-1, blockChains, blockChains)
	w.line("size_t lane;")
	w.line("uint32_t %s;", counter)
	w.line("int j;")
	g.blockKeys(w, b)
}

// blockKeys writes the loop that fills each row's keys and starts its sums.
func (g *gen) blockKeys(w *printer, b *blockForest) {
	u, kt := g.upper, b.keyType
	w.line("for (lane = 0; lane < used; lane++) {")
	w.in()
	w.line("const %s *const xr = x + (lane < count ? lane : 0u) * %s_NUM_FEATURES;", g.ft, u)
	w.line("%s *const k = key + (lane - lane %% %du) * %s_BK_KEYS + lane %% %du; /* eight rows' keys side by side */", kt, blockChains, u, blockChains)
	w.line("for (j = 0; j < %s_NUM_FEATURES; j++) {", u)
	w.in()
	if b.ranks != nil {
		g.blockRankKeyLines(w)
	} else {
		w.line("const %s v = xr[j];", g.ft)
		g.keyPair(w, fmt.Sprintf("k[2 * j * %d]", blockChains), fmt.Sprintf("k[(2 * j + 1) * %d]", blockChains), kt, "")
	}
	w.out()
	w.line("}")
	if b.ranks != nil {
		w.line("k[2 * %s_NUM_FEATURES * %d] = 0u; /* the leaves' key */", u, blockChains)
	} else {
		w.line("k[2 * %s_NUM_FEATURES * %d] = -%s; /* the leaves' key */", u, blockChains, hugeVal(kt))
	}
	for j := 0; j < g.p.NumOutputs; j++ {
		w.line("sum[lane * %s_NUM_OUTPUTS + %du] = %s;", u, j, g.accStart(j))
	}
	w.out()
	w.line("}")
}

// blockChains writes the walk of blockChains rows through one tree, their
// steps interleaved and unrolled, and the addition of their leaves.
func (g *gen) blockChains(w *printer, b *blockForest) {
	u := g.upper
	w.line("const %s *const kb = key + lane * %s_BK_KEYS; /* the eight rows' keys, interleaved */", b.keyType, u)
	for c := 0; c < blockChains; c++ {
		w.line("uint32_t i%d = 0u;", c)
	}
	w.line("uint32_t s;")
	w.line("if (steps <= %du) {", blockCheckDepth)
	w.in()
	w.line("for (s = 0; s < steps; s++) {")
	g.blockSteps(w, b, 1)
	w.line("}")
	w.out()
	w.line("} else {")
	w.in()
	g.blockWalkUntilStill(w, b)
	w.out()
	w.line("}")
	g.blockAdd(w, b)
}

// blockWalkUntilStill writes the walk of a tree deeper than
// blockCheckDepth: a step of every chain, then a test whether the sum of
// the eight node numbers moved. A step never lowers a node number (a
// split's children are numbered after it, pairOrder; a leaf is its own
// child), so an unchanged sum means no row moved: all eight sit on leaves.
// The sum is 32 bits where eight times the biggest tree's nodes fit (no
// step then adds 2^32), else 64.
func (g *gen) blockWalkUntilStill(w *printer, b *blockForest) {
	st, sum := chainsSum(b.biggest)
	w.line("%s was = 0u;", st)
	w.line("for (s = 0; s < steps; s++) {")
	g.blockSteps(w, b, 1)
	w.in()
	w.line("const %s now = %s;", st, sum)
	w.line("if (now == was) {")
	w.line("\tbreak; /* no row moved: the eight rows sit on leaves */")
	w.line("}")
	w.line("was = now;")
	w.out()
	w.line("}")
}

// chainsSum is the C type and expression of the sum of the blockChains
// node numbers i0, i1, ..., each at most most: 32 bits where blockChains
// times most is below 2^32, else 64.
func chainsSum(most int) (typ, sum string) {
	typ = "uint32_t"
	if int64(most)*blockChains >= 1<<32 {
		typ = "uint64_t"
	}
	terms := make([]string, blockChains)
	for c := range terms {
		terms[c] = fmt.Sprintf("i%d", c)
		if typ != "uint32_t" {
			terms[c] = fmt.Sprintf("(%s)i%d", typ, c)
		}
	}
	return typ, strings.Join(terms, " + ")
}

// blockSteps writes n steps of every chain, one chain after the other in
// each step.
func (g *gen) blockSteps(w *printer, b *blockForest, n int) {
	w.in()
	for range n {
		for c := 0; c < blockChains; c++ {
			w.line("i%d = (uint32_t)kid[i%d] + (uint32_t)(kb[kix[i%d] + %du] %s thr[i%d]);", c, c, c, c, b.cmp(), c)
		}
	}
	w.out()
}

// blockAdd writes the addition of the leaf each chain reached.
func (g *gen) blockAdd(w *printer, b *blockForest) {
	for c := 0; c < blockChains; c++ {
		if b.rows == nil {
			w.line("sum[lane + %du] += %s_bk_val[root + i%d];", c, g.name, c)
			continue
		}
		w.line("{")
		w.in()
		w.line("const %s *const lv = %s_bk_leaf[%s_bk_row[root + i%d]];", g.at, g.name, g.name, c)
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("\tsum[(lane + %du) * %s_NUM_OUTPUTS + (size_t)j] += lv[j];", c, g.upper)
		w.line("}")
		w.out()
		w.line("}")
	}
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
	g.blockLoopFrom(w, fn, rows, fmt.Sprintf("%s_%s / 4u", g.upper, rows), "under a quarter block")
}

// blockLoopFrom is blockLoop with the fewest rows of a part block (a C
// expression): fewer, which few says in words, go through NAME_predict one
// by one.
func (g *gen) blockLoopFrom(w *printer, fn, rows, least, few string) {
	ft, nf, no := g.ft, g.upper+"_NUM_FEATURES", g.upper+"_NUM_OUTPUTS"
	w.line("")
	w.line("void %s_predict_batch(const %s *x, size_t n, %s *outs)", g.name, ft, ft)
	w.line("{")
	w.line("\tsize_t r;")
	w.line("\tfor (r = 0; r + %s_%s <= n; r += %s_%s) {", g.upper, rows, g.upper, rows)
	w.line("\t\t%s_%s(x + r * %s, %s_%s, outs + r * %s);", g.name, fn, nf, g.upper, rows, no)
	w.line("\t}")
	w.line("\tif (n - r >= %s) { /* a part block, its idle lanes on row 0 */", least)
	w.line("\t\t%s_%s(x + r * %s, n - r, outs + r * %s);", g.name, fn, nf, no)
	w.line("\t\treturn;")
	w.line("\t}")
	w.line("\tfor (; r < n; r++) { /* %s: one by one, the same bits */", few)
	w.line("\t\t%s_predict(x + r * %s, outs + r * %s);", g.name, nf, no)
	w.line("\t}")
	w.line("}")
}

// blockAccepts says why the block layout cannot write p, or nil: what
// blockFits refuses, and more than BlockMaxFeatures features.
func blockAccepts(g *gen) error {
	if err := blockFits(g); err != nil {
		return err
	}
	if len(g.p.Features) > BlockMaxFeatures {
		return fmt.Errorf("%d features, more than %d (a block's keys live on the stack)", len(g.p.Features), BlockMaxFeatures)
	}
	return nil
}

// blockResolve is Resolve's answer when the block layout is asked for.
func blockResolve(p *compile.Program, o Options) (string, string) {
	if err := blockAccepts(&gen{p: p, o: o}); err != nil {
		return "table", fmt.Sprintf("block asked for, but %v: the table layout instead", err)
	}
	return Block, "asked for"
}
