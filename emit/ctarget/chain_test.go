package ctarget

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
)

// chainForest is a leaf (5), a tree of nine splits on x0, each with a leaf
// on its left (depth 9, past blockCheckDepth, so the trees are chained),
// and a leaf (7).
func chainForest() *gen {
	leaf := func(v float64) compile.Node {
		return compile.Node{Feature: -1, Left: -1, Right: -1, Value: []float64{v}}
	}
	var nodes []compile.Node
	var vals [][]float64
	for k := range 9 {
		// split k at index 2k: its leaf at 2k+1, the next split (or the last leaf) at 2k+2
		nodes = append(nodes, compile.Node{Feature: 0, Threshold: float64(k), Op: compile.LE, Left: int32(2*k + 1), Right: int32(2*k + 2)}, leaf(float64(10+k)))
		vals = append(vals, nil, []float64{float64(10 + k)})
	}
	nodes = append(nodes, leaf(19))
	vals = append(vals, []float64{19})
	p := &compile.Program{NumOutputs: 1, Features: make([]compile.Feature, 2), Trees: []compile.Tree{
		{Nodes: []compile.Node{leaf(5)}}, {Nodes: nodes}, {Nodes: []compile.Node{leaf(7)}}}}
	return &gen{p: p, ft: "double", at: "double", leaves: [][][]float64{{{5}}, vals, {{7}}}}
}

// TestBlockChain: where a tree is deeper than blockCheckDepth and there is
// one output, the block forest is chained: child numbers count from the
// forest's first node, a leaf's child is the next tree's root in its chunk
// or the stop node (after every tree's nodes, its own child, with the
// leaves' key and threshold), a split's value is -0.0 (bits and all), a
// leaf's its own; chunks of 1 byte take a tree each.
func TestBlockChain(t *testing.T) {
	negZero := math.Float64bits(math.Copysign(0, -1))
	for _, tc := range []struct {
		chunk  int
		first  []int
		linkTo []uint32 // where each tree's leaves lead
	}{
		{0, []int{0}, []uint32{1, 20, 21}},
		{1, []int{0, 1, 20}, []uint32{21, 21, 21}},
	} {
		g := chainForest()
		g.o.BlockChunkBytes = tc.chunk
		b := g.buildBlock()
		require.NotNil(t, b.chain, "chunk %d", tc.chunk)
		require.Equal(t, tc.first, b.chain.first)
		require.Equal(t, 21, b.chain.stop)
		require.Len(t, b.kid, 22)
		require.Equal(t, "uint32_t", b.kidTyp)
		leafKey := uint32(2 * 2 * blockChains)
		for tree, r := range []int{0, 1, 20} {
			for i := r; i < b.treeEnd(tree); i++ {
				if b.key[i] == leafKey {
					require.Equal(t, tc.linkTo[tree], b.kid[i], "chunk %d, tree %d, leaf %d", tc.chunk, tree, i)
					require.NotEqual(t, negZero, math.Float64bits(b.val[i]), "a leaf keeps its value")
					continue
				}
				require.Equal(t, uint32(i+1), b.kid[i], "a split's left child, from the forest's first node")
				require.Equal(t, negZero, math.Float64bits(b.val[i]), "node %d: a split's value is -0.0", i)
			}
		}
		require.Equal(t, []float64{5, 7}, []float64{b.val[0], b.val[20]})
		require.Equal(t, uint32(21), b.kid[21], "the stop node is its own child")
		require.Equal(t, leafKey, b.key[21])
		require.Equal(t, b.thr[0], b.thr[21], "the stop node's threshold is a leaf's")
		require.Equal(t, negZero, math.Float64bits(b.val[21]))
	}
}

// TestBlockChainOnlyDeep: a forest of shallow trees, or of two outputs,
// keeps the lockstep walk.
func TestBlockChainOnlyDeep(t *testing.T) {
	g := chainForest()
	g.p.Trees = g.p.Trees[:1]
	g.leaves = g.leaves[:1]
	require.Nil(t, g.buildBlock().chain, "one leaf: nothing deeper than blockCheckDepth")
	b := &blockForest{steps: []int{blockCheckDepth + 1}, rows: &leafRows{}}
	require.False(t, b.chainable(), "leaf rows (several outputs)")
	b.rows = nil
	require.True(t, b.chainable())
}

// TestBlockChunks: a chunk holds trees while their nodes fit the bytes,
// and at least one tree.
func TestBlockChunks(t *testing.T) {
	require.Equal(t, []int{0, 2, 3}, blockChunks([]int{10, 10, 30, 5, 1}, 2, 40))
	require.Equal(t, []int{0}, blockChunks([]int{10, 10, 30}, 2, 100))
	require.Equal(t, []int{0, 1, 2}, blockChunks([]int{10, 10, 30}, 2, 1))
}
