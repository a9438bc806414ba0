package compile

import (
	"math"
	"testing"
)

// TestLeafBox: the facts of a path are the intersection of its comparisons,
// with NaN allowed only where every split on the path sends it that way.
func TestLeafBox(t *testing.T) {
	p, err := Parse(`program regression outputs=1 combine=sum transform=none compare=double base=0
feature "x" used
feature "y" used
tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 4
  1 #1 x0 < -2 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 x1 <= 5 missing=right ? 5 : 6
  5 #5 leaf 3
  6 #6 leaf 4
`)
	if err != nil {
		t.Fatal(err)
	}
	inf := math.Inf(1)
	full := Interval{Lo: -inf, Hi: inf, NaN: true}
	for _, c := range []struct {
		leaf int32
		want []Interval
	}{
		{2, []Interval{{Lo: -inf, Hi: -2, HiOpen: true}, full}},
		{3, []Interval{{Lo: -2, Hi: 1, NaN: true}, full}},
		{5, []Interval{{Lo: 1, LoOpen: true, Hi: inf}, {Lo: -inf, Hi: 5}}},
		{6, []Interval{{Lo: 1, LoOpen: true, Hi: inf}, {Lo: 5, LoOpen: true, Hi: inf, NaN: true}}},
	} {
		for _, only := range []bool{false, true} {
			got := LeafBox(p, &p.Trees[0], c.leaf, only)
			for f := range c.want {
				if got[f] != c.want[f] {
					t.Errorf("leaf %d (comparisons only %v), feature %d: %+v, want %+v", c.leaf, only, f, got[f], c.want[f])
				}
			}
		}
	}
}
