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

// TestBlockNodes: a split's children take consecutive numbers counted from
// the tree's root, a leaf is its own child with threshold +inf and the
// -inf key (2 * features), "<" becomes "<=" the value below where the
// forest mixes the two, NaN going right sets the key index's low bit, a
// tree records its depth, and keys stay double where a float key could
// round onto a threshold.
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
	p := &compile.Program{NumOutputs: 1, Features: make([]compile.Feature, 3), Trees: []compile.Tree{{Nodes: []compile.Node{leaf(5)}}, tr}}
	g := &gen{p: p, ft: "double", leaves: [][][]float64{{{5}}, {nil, {10}, nil, {30}, {40}}}}
	b := g.buildBlock()
	require.Equal(t, []int{0, 1}, b.root)
	require.Equal(t, []int{0, 2}, b.steps)
	require.False(t, b.ge)
	// tree 0's leaf 0; tree 1 from its root: 0, children 1 (leaf 10) and 2, whose children 3 and 4
	require.Equal(t, []uint32{0, 1, 1, 3, 3, 4}, b.kid)
	// key indexes times the eight chains; the leaves' key is 2 * 3
	require.Equal(t, []uint32{48, (1<<1 | 1) * 8, 48, 0, 48, 48}, b.key)
	require.Equal(t, []float64{5, 0, 10, 0, 30, 40}, b.val)
	require.Equal(t, "uint16_t", b.keyType, "a float key above 1 can round to 1: ranks")
	// ranks: each split's threshold is its index among its feature's cuts
	require.Equal(t, [][]float64{{1}, {math.Nextafter(2, math.Inf(-1))}, nil}, b.ranks.cuts)
	require.Equal(t, []float64{0, 0, 0, 0, 0, 0}, b.thr)
	require.Equal(t, []int{0, 0, 0}, b.ranks.lo)
	require.Equal(t, []int{1, 1, 0}, b.ranks.hi)
	require.Equal(t, ">", b.cmp())
	require.Equal(t, "uint8_t", b.kidTyp, "child numbers: the smallest type the biggest tree fits")
	require.Equal(t, 5, b.nodeBytes(), "a node in the three arrays: child 1, rank 2, key index 2")
}

// TestBlockKeepsLT: where every split is "<", the thresholds stay the
// model's and a row goes right on key >= t; a midpoint between two floats
// with the lower one even keeps the keys float.
func TestBlockKeepsLT(t *testing.T) {
	lo := 0.5
	mid := (lo + float64(math.Nextafter32(0.5, 1))) / 2
	tr := compile.Tree{Nodes: []compile.Node{
		{Feature: 0, Threshold: math.Nextafter(mid, 1), Op: compile.LT, Left: 1, Right: 2},
		{Feature: -1, Left: -1, Right: -1, Value: []float64{1}},
		{Feature: -1, Left: -1, Right: -1, Value: []float64{2}},
	}}
	p := &compile.Program{NumOutputs: 1, Features: make([]compile.Feature, 200), Trees: []compile.Tree{tr}}
	g := &gen{p: p, ft: "double", leaves: [][][]float64{{nil, {1}, {2}}}}
	b := g.buildBlock()
	require.True(t, b.ge)
	require.Equal(t, "float", b.keyType)
	require.Equal(t, []uint32{8, 400 * 8, 400 * 8}, b.key)
	require.Nil(t, b.ranks)
}

// TestBlockRows: a block holds as many rows as blockKeyBytes of keys
// allow, in eights, from 8 to BlockMaxRows.
func TestBlockRows(t *testing.T) {
	require.Equal(t, BlockMaxRows, blockRows(41, 4)) // 128 rows x 41 keys x 4 bytes = 20,992 bytes
	require.Equal(t, 16, blockRows(201, 8))          // 16 x 201 x 8 = 25,728 bytes
	require.Equal(t, 8, blockRows(2*BlockMaxFeatures+1, 8))
}

// TestRankOf: a rank counts the cuts below a value, or at or below it
// where every split is a <, so that x > T[i] (x >= T[i]) exactly when the
// rank exceeds i; -inf as a cut counts for -inf only at or below.
func TestRankOf(t *testing.T) {
	cuts := []float64{math.Inf(-1), -1, 0, 2.5}
	for _, ge := range []bool{false, true} {
		for _, x := range []float64{math.Inf(-1), -2, -1, math.Nextafter(-1, 0), 0, 1, 2.5, 3, math.Inf(1)} {
			r := rankOf(cuts, x, ge)
			for i, c := range cuts {
				right := x > c || ge && x == c
				require.Equal(t, right, r > i, "x %v, cut %v, ge %v", x, c, ge)
			}
		}
	}
}

// TestBlockRowsBig: forests whose nodes pass blockBigNodes take blocks of
// up to blockBigRows rows.
func TestBlockRowsBig(t *testing.T) {
	require.Equal(t, blockBigRows, blockRowsBig(41, 4)) // 1,024 x 41 x 4 = 167,936 bytes
	require.Equal(t, 320, blockRowsBig(201, 4))         // 320 x 201 x 4 = 257,280 bytes
}
