package ctarget

import (
	"fmt"
	"math"
	"slices"
)

// The chained block walk. Where the forest has one output and a tree
// deeper than blockCheckDepth, the block walk does not take eight rows
// through one tree at a time, in lockstep until the deepest of the eight
// reaches its leaf; it links the trees: a leaf's child is the next tree's
// root, so that each of eight rows walks a chunk of trees (blockChunks)
// one after the other, at its own pace, and only the end of a chunk waits
// for the slowest row. Each node carries a value, the leaf's at a leaf and
// -0.0 at a split (x + -0.0 is x for every x, -0 and NaN included), and a
// row adds the value of every node it leaves, so its leaves are added in
// tree order as NAME_predict adds them: the same bits. The chunk's last
// leaves lead to the stop node, which is its own child with the value
// -0.0; eight rows have walked the chunk once the sum of their node
// numbers is eight times the stop node's (every other number is lower).
//
// On the 500-round 63-leaf LightGBM model of bench/libs/run.sh (trees 8
// to 23 deep; a row's leaf 4.45 steps down on average, a lockstep group of
// eight walking 9.42) the lockstep walk ran 40,197 instructions a row and
// the chained walk 24,203 (callgrind, gcc 12 -O2), and 3,558 to 4,951 ns a
// row against 2,267 to 3,066 (10,000 rows, best of 5, four alternating
// runs, load average 0.5 to 0.8; docs/batch-layouts.md).

// blockChunkBytes bounds the node tables of one chunk of chained trees
// (child, threshold, key index and value a node; at least one tree a
// chunk): eight rows walk a chunk's trees before the next eight do, so a
// chunk should stay in the first- or second-level cache, while the end of
// each chunk waits for the slowest of the eight. On the LightGBM model of
// bench/libs/run.sh (16 bytes a node, 2,000 a tree) chunks of 10, 25, 50,
// 100 and 500 trees took 2,511 to 3,677, 2,453 to 2,629, 2,600 to 2,636,
// 2,548 to 2,962 and 2,859 to 3,099 ns a row (a hand-made copy of the
// walk, three interleaved runs, load average 0.4).
const blockChunkBytes = 48 << 10

// blockChain is what the chained walk adds to the block forest.
type blockChain struct {
	first []int // per chunk: its first tree's root
	stop  int   // the stop node's number, after every tree's nodes
}

// chainable says whether the block walk chains the trees: one output (a
// value a node, no rows of leaf vectors) and a tree deeper than
// blockCheckDepth. Forests of shallow trees keep the lockstep walk, whose
// steps need no test there.
func (b *blockForest) chainable() bool {
	if b.rows != nil {
		return false
	}
	for _, s := range b.steps {
		if s > blockCheckDepth {
			return true
		}
	}
	return false
}

// chainNodeBytes is a chained node's size: the three arrays' (a 4-byte
// child) and the value.
func (g *gen) chainNodeBytes(b *blockForest) int {
	return b.nodeBytes() + g.elemBytes()
}

// blockChunks splits the trees into chunks of at most max bytes of nodes
// (at least one tree each) and returns each chunk's first tree.
func blockChunks(sizes []int, nodeBytes, max int) []int {
	var first []int
	used := 0
	for t, n := range sizes {
		if len(first) == 0 || used+n*nodeBytes > max {
			first = append(first, t)
			used = 0
		}
		used += n * nodeBytes
	}
	return first
}

// chain links b's trees for the chained walk, chunks of at most
// chunkBytes of nodes: child numbers from the forest's first node, a
// leaf's child the next tree's root in its chunk or the stop node, a
// split's value -0.0; the stop node is appended as a leaf that is its own
// child.
func (g *gen) chain(b *blockForest, chunkBytes int) {
	leafKey := g.blockLeafKey()
	sizes := make([]int, len(b.root))
	for t, r := range b.root {
		sizes[t] = b.treeEnd(t) - r
	}
	firstTree := blockChunks(sizes, g.chainNodeBytes(b), chunkBytes)
	c := &blockChain{stop: len(b.kid)}
	starts := make([]bool, len(b.root)+1) // per tree: it starts a chunk; past the last, the stop
	starts[len(b.root)] = true
	for _, t := range firstTree {
		c.first = append(c.first, b.root[t])
		starts[t] = true
	}
	negZero := math.Copysign(0, -1)
	for t, r := range b.root {
		next := c.stop
		if !starts[t+1] {
			next = b.root[t+1]
		}
		for i := r; i < b.treeEnd(t); i++ {
			if b.key[i] == leafKey {
				b.kid[i] = uint32(next)
				continue
			}
			b.kid[i] += uint32(r)
			b.val[i] = negZero
		}
	}
	b.key = append(b.key, leafKey)
	b.thr = append(b.thr, b.thr[slices.Index(b.key, leafKey)]) // a leaf's, as its key type writes it
	b.kid = append(b.kid, uint32(c.stop))
	b.val = append(b.val, negZero)
	b.chain = c
}

// treeEnd is the number after tree t's last node.
func (b *blockForest) treeEnd(t int) int {
	if t+1 < len(b.root) {
		return b.root[t+1]
	}
	if b.chain != nil {
		return b.chain.stop
	}
	return len(b.kid)
}

// chainTables writes the chunks' first nodes and the stop node's number.
func (g *gen) chainTables(w *printer, b *blockForest) {
	w.line("#define %s_BK_STOP %du /* the stop node: every chunk's last leaves lead there */", g.upper, b.chain.stop)
	w.line("")
	g.bvArray(w, "uint32_t", "bk_first", "chained block walk: each chunk's first tree's root", len(b.chain.first), func(i int) string { return fmt.Sprintf("%du", b.chain.first[i]) })
}

// chainBatch writes NAME_block for the chained walk.
func (g *gen) chainBatch(w *printer, b *blockForest) {
	u := g.upper
	w.line("/* Scores the count <= %s_BK_ROWS rows at x into outs: writes each row's", u)
	w.line(" * keys, then chunk by chunk of trees eight rows at a time walk the chunk's")
	w.line(" * trees one after the other, each at its own pace (a leaf's child is the")
	w.line(" * next tree's root, the chunk's last leaves' the stop node); a step is a")
	w.line(" * comparison and an addition, and adds the value of the node it leaves")
	w.line(" * (-0.0 at a split, which changes no sum), so the leaves are added in tree")
	w.line(" * order as %s_predict adds them. Four steps, then a test whether all", g.name)
	w.line(" * eight rows reached the stop node. Up to %d lanes past count walk row 0", blockChains-1)
	w.line(" * and are dropped. gcc 12 -O2 would pack the eight sums in pairs into")
	w.line(" * vectors, loading the values two by two and spilling the node numbers:")
	w.line(" * 34,567 instructions a row against 24,056 on a LightGBM model. */")
	w.line("#if defined(__GNUC__) && !defined(__clang__)")
	w.line("__attribute__((optimize(\"no-tree-slp-vectorize\")))")
	w.line("#endif")
	g.blockHead(w, b, "chunk")
	w.line("for (chunk = 0; chunk < %du; chunk++) {", len(b.chain.first))
	w.in()
	w.line("const uint32_t first = %s_bk_first[chunk];", g.name)
	g.blockLanes(w, func() { g.chainChains(w, b) })
}

// chainSteps is the steps of the chained walk between two tests: on the
// LightGBM model 2, 4 and 8 ran 25,843, 24,203 and 23,851 instructions a
// row, and 2,445, 2,286 and 2,490 ns a row (one run each): a test costs
// nine instructions, and a chunk's end is overshot by half the steps.
const chainSteps = 4

// chainChains writes the walk of blockChains rows through one chunk.
func (g *gen) chainChains(w *printer, b *blockForest) {
	u, n := g.upper, g.name
	w.line("const %s *const kb = key + lane * %s_BK_KEYS; /* the eight rows' keys, interleaved */", b.keyType, u)
	for c := 0; c < blockChains; c++ {
		w.line("uint32_t i%d = first;", c)
	}
	for c := 0; c < blockChains; c++ {
		w.line("%s s%d = sum[lane + %du];", g.at, c, c)
	}
	st, at := chainsSum(b.chain.stop)
	stop := fmt.Sprintf("%du * %s_BK_STOP", blockChains, u)
	if st != "uint32_t" {
		stop = fmt.Sprintf("(%s)%s", st, stop)
	}
	w.line("for (;;) {")
	w.in()
	for range chainSteps {
		for c := 0; c < blockChains; c++ {
			w.line("s%d += %s_bk_val[i%d];", c, n, c)
			w.line("i%d = %s_bk_kid[i%d] + (uint32_t)(kb[%s_bk_k[i%d] + %du] %s %s_bk_thr[i%d]);", c, n, c, n, c, c, b.cmp(), n, c)
		}
	}
	w.line("if (%s == %s) {", at, stop)
	w.line("\tbreak; /* the eight rows reached the stop node */")
	w.line("}")
	w.out()
	w.line("}")
	for c := 0; c < blockChains; c++ {
		w.line("sum[lane + %du] = s%d;", c, c)
	}
}
