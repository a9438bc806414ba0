package ctarget

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
)

// TestBlockFallsBack: the block layout is written for numeric splits, two
// outputs and float32 sums, and the table layout, with the reason in the
// header, for set splits, missing-value bands and per-output trees. That
// the layout scores bit for bit like the interpreter is the golden suite's
// C check and verify's TestCBlockLanes (with and without AVX2).
func TestBlockFallsBack(t *testing.T) {
	checkFallsBack(t, Block, []fallback{
		{"sklearn-breast-cancer", Block, "asked for"},
		{"v2-accumulate32-sum", Block, "asked for"},
		{"v2-set-exact", "table", "a set split"},
		{"v2-missing-value-0", "table", "a missing-value band"},
		{"v2-zero-missing", "table", "zero counts as missing"},
		{"v2-output-trees-softmax", "table", "adds to one output"},
	})
}

// TestBlockNodes: a split's children take consecutive numbers, a leaf is
// its own child with threshold +inf, "<" becomes "<=" the value below, NaN
// going right sets the child word's low bit, and a tree takes as many
// steps as it is deep.
func TestBlockNodes(t *testing.T) {
	leaf := func(v float64) compile.Node {
		return compile.Node{Feature: -1, Left: -1, Right: -1, Value: []float64{v}}
	}
	// node 0: x1 < 2 (NaN right) into 1 (a leaf) and 2: x0 <= 1 (NaN left) into leaves 3 and 4
	tr := compile.Tree{Nodes: []compile.Node{
		{Feature: 1, Threshold: 2, Op: compile.LT, Left: 1, Right: 2},
		leaf(10),
		{Feature: 0, Threshold: 1, Op: compile.LE, MissingLeft: true, Left: 3, Right: 4},
		leaf(30), leaf(40),
	}}
	p := &compile.Program{NumOutputs: 1, Trees: []compile.Tree{{Nodes: []compile.Node{leaf(5)}}, tr}}
	g := &gen{p: p, leaves: [][][]float64{{{5}}, {nil, {10}, nil, {30}, {40}}}}
	b := g.buildBlock()
	require.Equal(t, []int{0, 1}, b.root)
	require.Equal(t, []int{0, 2}, b.steps)
	// numbers: tree 0's leaf 0; tree 1: root 1, children 2 (leaf 10) and 3, whose children 4 and 5
	require.Equal(t, []uint32{0 << 1, 2<<1 | 1, 2 << 1, 4 << 1, 4 << 1, 5 << 1}, b.kid)
	require.Equal(t, []int{0, 1, 0, 0, 0, 0}, b.feat)
	require.Equal(t, math.Nextafter(2, math.Inf(-1)), b.thr[1])
	require.Equal(t, 1.0, b.thr[3])
	for _, i := range []int{0, 2, 4, 5} {
		require.True(t, math.IsInf(b.thr[i], 1), "leaf %d", i)
	}
	require.Equal(t, []float64{5, 0, 10, 0, 30, 40}, b.val)
}
