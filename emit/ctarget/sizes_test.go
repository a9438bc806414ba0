package ctarget

import (
	"path/filepath"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// TestWorstSplits holds WorstSplits to a count made another way: for every
// leaf, the splits on its path found by walking parent links up to the
// root; the worst leaf of each tree, summed over trees.
func TestWorstSplits(t *testing.T) {
	for _, name := range []string{"trained-wine", "edge-single-leaf", "v2-set-exact", "sklearn-breast-cancer"} {
		f, err := forest.ReadFile(filepath.Join("..", "..", "golden", "testdata", name, "model.json"))
		if err != nil {
			t.Fatal(err)
		}
		p, _, err := compile.Compile(f, compile.Options{})
		if err != nil {
			t.Fatal(err)
		}
		want := 0
		for ti := range p.Trees {
			nodes := p.Trees[ti].Nodes
			parent := make([]int32, len(nodes))
			for i := range parent {
				parent[i] = -1
			}
			for i, n := range nodes {
				if !n.IsLeaf() {
					parent[n.Left], parent[n.Right] = int32(i), int32(i)
				}
			}
			worst := 0
			for i, n := range nodes {
				if !n.IsLeaf() {
					continue
				}
				d := 0
				for j := parent[i]; j >= 0; j = parent[j] {
					d++
				}
				worst = max(worst, d)
			}
			want += worst
		}
		if got := WorstSplits(p); got != want {
			t.Errorf("%s: WorstSplits %d, want %d", name, got, want)
		}
		if name == "edge-single-leaf" && want != 0 {
			t.Errorf("a single leaf tests %d splits", want)
		}
	}
}
