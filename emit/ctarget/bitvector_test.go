package ctarget

import (
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// TestBitvectorFallsBack: the bitvector layout is written where every tree
// has at most 64 leaves and only numeric splits, and the table layout, with
// the reason in the header, where a set split (format 2) is met. That the
// layout scores bit for bit like the interpreter is the golden suite's C
// check (every case, double and float).
func TestBitvectorFallsBack(t *testing.T) {
	checkFallsBack(t, Bitvector, []fallback{
		{"sklearn-breast-cancer", Bitvector, "asked for"},
		{"v2-set-exact", "table", "a set split"},
	})
}

// fallback is a golden model, the layout Resolve picks for it when asked
// for another, and a piece of the reason.
type fallback struct{ model, layout, why string }

// checkFallsBack asks for layout on each model and checks what Resolve
// picks, why, and that the header names it.
func checkFallsBack(t *testing.T, layout string, cases []fallback) {
	t.Helper()
	for _, c := range cases {
		f, err := forest.ReadFile(filepath.Join("..", "..", "golden", "testdata", c.model, "model.json"))
		require.NoError(t, err)
		p, _, err := compile.Compile(f, compile.Options{})
		require.NoError(t, err)
		got, why, err := Resolve(p, Options{Layout: layout})
		require.NoError(t, err)
		require.Equal(t, c.layout, got, c.model)
		require.Contains(t, why, c.why, c.model)
		files, err := Emit(p, Options{Layout: layout})
		require.NoError(t, err)
		require.Contains(t, string(files[0].Data), "layout "+c.layout, c.model)
	}
}

// TestBitvectorMasks: leaves are numbered left to right and a split's mask
// clears exactly its left subtree's leaves.
func TestBitvectorMasks(t *testing.T) {
	// node 0 splits into 1 (a split into leaves 3 and 4) and 2 (a leaf)
	tr := &compile.Tree{Nodes: []compile.Node{
		{Feature: 0, Left: 1, Right: 2},
		{Feature: 1, Left: 3, Right: 4},
		{Feature: -1, Left: -1, Right: -1},
		{Feature: -1, Left: -1, Right: -1},
		{Feature: -1, Left: -1, Right: -1},
	}}
	leaves, masks := bvTree(tr)
	require.Equal(t, []int32{3, 4, 2}, leaves)
	require.Equal(t, ^uint64(0b011), masks[0])
	require.Equal(t, ^uint64(0b001), masks[1])
}
