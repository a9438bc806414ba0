package ctarget

import (
	"math"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
)

// TestPerfectFallsBack: the perfect layout is written for shallow forests
// of numeric splits, several outputs and float32 sums, and the table
// layout, with the reason in the header, for set splits, missing-value
// bands, per-output trees, forests of lone leaves, trees deeper than
// PerfectMaxDepth and padding past perfectMaxGrowth.
func TestPerfectFallsBack(t *testing.T) {
	checkFallsBack(t, Perfect, []fallback{
		{"edge-nan-routing", Perfect, "asked for"},
		{"v2-accumulate32-sum", Perfect, "asked for"},
		{"v2-multi-output-regression", Perfect, "asked for"},
		{"v2-set-exact", "table", "a set split"},
		{"v2-missing-value-0", "table", "a missing-value band"},
		{"v2-zero-missing", "table", "zero counts as missing"},
		{"v2-output-trees-softmax", "table", "adds to one output"},
		{"edge-single-leaf", "table", "every tree is one leaf"},
		{"v2-exp", "table", "trees of depth 22, deeper than 10"},
		{"sklearn-wine", "table", "more than 4096 and than 4 times the forest's 654"},
		{"trained-wine", Perfect, "asked for"}, // 12 trees of depth 6: 1,524 padded nodes, under perfectSmall
	})
}

// perfectLeaf is a leaf of value v.
func perfectLeaf(v float64) compile.Node {
	return compile.Node{Feature: -1, Left: -1, Right: -1, Value: []float64{v}}
}

// TestPerfectPadding: a forest of depth 2 lays each tree out level by
// level in 3 splits and 4 leaves; a leaf above depth 2 fills its padding
// subtree's leaves with its value behind a split that sends every row left
// (+inf, NaN left); NaN going right sets the feature word's low bit; "<"
// becomes "<=" the value below where the forest mixes the two.
func TestPerfectPadding(t *testing.T) {
	// tree 1: node 0: x1 < 2 (NaN right) into 1 (a leaf) and 2: x3 <= 1 (NaN left) into leaves 3 and 4
	tr := compile.Tree{Nodes: []compile.Node{
		{Feature: 1, Threshold: 2, Op: compile.LT, Left: 1, Right: 2},
		perfectLeaf(10),
		{Feature: 3, Threshold: 1, Op: compile.LE, MissingLeft: true, Left: 3, Right: 4},
		perfectLeaf(30), perfectLeaf(40),
	}}
	p := &compile.Program{NumOutputs: 1, Features: make([]compile.Feature, 4), Trees: []compile.Tree{{Nodes: []compile.Node{perfectLeaf(5)}}, tr}}
	g := &gen{p: p, ft: "double", leaves: [][][]float64{{{5}}, {nil, {10}, nil, {30}, {40}}}}
	pf := g.buildPerfect()
	require.Equal(t, 2, pf.depth)
	require.False(t, pf.ge)
	require.Equal(t, "uint8_t", pf.featTyp)
	require.Equal(t, "double", pf.keyType, "a float key above 1 can round to 1")
	// tree 0: all padding; tree 1: root, the padded leaf 10 at 1, the split at 2
	require.Equal(t, []uint32{0, 0, 0, 1<<1 | 1, 0, 3 << 1}, pf.feat)
	inf := math.Inf(1)
	require.Equal(t, []float64{inf, inf, inf, math.Nextafter(2, math.Inf(-1)), inf, 1}, pf.thr)
	require.Equal(t, []float64{5, 5, 5, 5, 10, 10, 30, 40}, pf.leaf)
}

// TestPerfectKeepsLT: where every split is "<", the thresholds stay the
// model's and a row goes right on x >= t; a double just below 0.5 rounds
// to the float 0.5, so the keys stay double.
func TestPerfectKeepsLT(t *testing.T) {
	tr := compile.Tree{Nodes: []compile.Node{
		{Feature: 0, Threshold: 0.5, Op: compile.LT, Left: 1, Right: 2},
		perfectLeaf(1), perfectLeaf(2),
	}}
	p := &compile.Program{NumOutputs: 1, Features: make([]compile.Feature, 200), Trees: []compile.Tree{tr}}
	g := &gen{p: p, ft: "double", leaves: [][][]float64{{nil, {1}, {2}}}}
	pf := g.buildPerfect()
	require.True(t, pf.ge)
	require.Equal(t, "double", pf.keyType)
	require.Equal(t, "uint16_t", pf.featTyp)
	require.Equal(t, []float64{0.5}, pf.thr)
	require.Equal(t, []uint32{1}, pf.feat)
}

// TestFloatExact: x > t decides as (float)x > (float)t exactly when t is
// where rounding to float turns: the midpoint of two floats whose lower
// one is even (round half to even; IEEE 754-2008, 4.3.1), as compile
// writes a float32 model's cuts for double C; not at a float itself, nor
// at the midpoint above an odd float, which rounds up; and x >= t at a
// float, which the double below rounds to.
func TestFloatExact(t *testing.T) {
	lo := 0.5
	hi := float64(math.Nextafter32(0.5, 1))
	mid := (lo + hi) / 2
	require.True(t, floatExact(mid, false))
	require.False(t, floatExact(lo, false))
	even := float64(math.Nextafter32(float32(hi), 1)) // hi is odd
	require.False(t, floatExact((hi+even)/2, false), "the midpoint above an odd float rounds up")
	require.True(t, floatExact(math.Nextafter((hi+even)/2, 0), false))
	require.False(t, floatExact(lo, true))
	require.True(t, floatExact(math.Nextafter(mid, 1), true))
	require.True(t, floatExact(math.Inf(1), false))
	for _, x := range []float64{mid, math.Nextafter(mid, 1), math.Nextafter(mid, 0), lo, hi} {
		require.Equal(t, x > mid, float32(x) > float32(mid), "%v", x)
	}
}

// TestPerfectRows: a block holds as many rows as perfectKeyBytes of keys
// allow, in groups of chains, from one group to PerfectMaxRows.
func TestPerfectRows(t *testing.T) {
	require.Equal(t, 64, perfectRows(20, 16))  // 64 rows x 40 keys x 8 bytes = 20 KiB
	require.Equal(t, 16, perfectRows(100, 16)) // 16 x 200 x 8 = 25,600 bytes
	require.Equal(t, 16, perfectRows(100, 8))
	require.Equal(t, 8, perfectRows(PerfectMaxFeatures, 8))
	require.Equal(t, 16, perfectRows(PerfectMaxFeatures, 16)) // one group: 64 KiB
}

// chainTree is a tree of depth d: each split's right child is a leaf, its
// left child the next split (x0 < i + 0.5 at depth i).
func chainTree(d int) (compile.Tree, [][]float64) {
	var tr compile.Tree
	var leaves [][]float64
	for i := 0; i < d; i++ {
		at := int32(len(tr.Nodes))
		left := at + 2
		tr.Nodes = append(tr.Nodes, compile.Node{Feature: 0, Threshold: float64(i) + 0.5, Op: compile.LT, Left: left, Right: at + 1}, perfectLeaf(float64(i)))
		leaves = append(leaves, nil, []float64{float64(i)})
	}
	tr.Nodes = append(tr.Nodes, perfectLeaf(-1))
	return tr, append(leaves, []float64{-1})
}

// TestPerfectOrdRule: float keys take the packed walk (one word a node,
// perfectOrdChains rows interleaved), double keys the walk of separate
// key indexes and thresholds.
func TestPerfectOrdRule(t *testing.T) {
	tr, leaves := chainTree(6)
	p := &compile.Program{NumOutputs: 1, Features: make([]compile.Feature, 3), Trees: []compile.Tree{tr}}
	g := &gen{p: p, ft: "float", at: "float", leaves: [][][]float64{leaves}}
	pf := g.buildPerfect()
	require.True(t, pf.ord)
	require.Equal(t, perfectOrdChains, pf.chains())
	tr = compile.Tree{Nodes: []compile.Node{{Feature: 0, Threshold: 0.1, Op: compile.LE, Left: 1, Right: 2}, perfectLeaf(1), perfectLeaf(2)}}
	p = &compile.Program{NumOutputs: 1, Features: make([]compile.Feature, 3), Trees: []compile.Tree{tr}}
	g = &gen{p: p, ft: "double", at: "double", leaves: [][][]float64{{nil, {1}, {2}}}}
	pf = g.buildPerfect()
	require.Equal(t, "double", pf.keyType, "0.1 is no float")
	require.False(t, pf.ord, "double keys keep the walk of separate arrays")
	require.Equal(t, perfectChains, pf.chains())
}

// TestOrdPacked: a packed key (ordered integer << 32 over zeros, or ones
// for x >= t) is above a packed node word (threshold << 32 | key index)
// exactly when the float key is above the threshold (at or above it), for
// every pair of floats from a list of edges (±0, ±inf, subnormals, the
// largest floats, neighbours) and key indexes 0, 1 and the largest
// feature's; thresholds are never -0 (perfectPlace).
func TestOrdPacked(t *testing.T) {
	fs := []float32{0, float32(math.Copysign(0, -1)), float32(math.Inf(1)), float32(math.Inf(-1)),
		math.SmallestNonzeroFloat32, -math.SmallestNonzeroFloat32, math.MaxFloat32, -math.MaxFloat32,
		1, -1, 1.5, -1.5, math.Nextafter32(1, 2), math.Nextafter32(1, 0), math.Nextafter32(-1, 0), 1e-38, -1e-38, 3.25e7}
	for _, k := range fs {
		for _, th := range fs {
			if th == 0 && math.Signbit(float64(th)) {
				continue
			}
			for _, idx := range []uint64{0, 1, PerfectMaxFeatures<<1 | 1} {
				node := uint64(ordFloat(th))<<32 | idx
				require.Equal(t, k > th, uint64(ordFloat(k))<<32 > node, "%v > %v, key index %d", k, th, idx)
				require.Equal(t, k >= th, uint64(ordFloat(k))<<32|0xffffffff > node, "%v >= %v, key index %d", k, th, idx)
			}
		}
	}
}

// TestBatchResolve: batch asks for perfect where it builds, else block,
// else what auto writes, and says why.
func TestBatchResolve(t *testing.T) {
	checkFallsBack(t, Batch, []fallback{
		{"edge-nan-routing", Perfect, "padded to perfect trees"},
		{"v2-exp", Block, "not perfect (trees of depth 22, deeper than 10): the block walk"},
		{"sklearn-wine", Block, "not perfect (perfect trees of depth"},
		{"v2-set-exact", "nested", "neither perfect (tree 0, node 0: a set split) nor block"},
		{"v2-missing-value-0", "nested", "nor block (a missing-value band): auto's choice"},
	})
}
