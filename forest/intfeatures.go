package forest

import (
	"fmt"
	"math"
	"slices"
)

// WithIntegerFeatures returns a copy of f in which every numeric split on
// one of the named features compares with ⌊threshold⌋, for inputs that
// arrive as integers (ADC counts, enumerations): for an integer x,
// x <= t exactly when x <= ⌊t⌋, so the copy scores every row whose named
// features hold integers exactly as f does (a float32 model too: a float
// at or above 2^24 is an integer, and below it an integer is its own
// float). Splits that differed only between two integers become one cut,
// and small integers are float values, so the binned C layout stores
// fewer and shorter cuts. A non-integer x meets x <= k as ⌈x⌉ does, so it
// scores as its ceiling would in f; the missing value and the zero band
// still read x itself. It also returns how many thresholds changed.
// Unknown or repeated names are an error naming them.
func (f *Forest) WithIntegerFeatures(names []string) (*Forest, int, error) {
	want := make([]bool, len(f.Features))
	for _, n := range names {
		i := slices.Index(f.Features, n)
		if i < 0 {
			return nil, 0, fmt.Errorf("integer feature %q is not one of the model's %d features", n, len(f.Features))
		}
		if want[i] {
			return nil, 0, fmt.Errorf("integer feature %q is listed twice", n)
		}
		want[i] = true
	}
	g := *f
	g.Trees = make([]Tree, len(f.Trees))
	changed := 0
	for ti, t := range f.Trees {
		t.Threshold = slices.Clone(t.Threshold)
		for i, fi := range t.Feature {
			if fi < 0 || !want[fi] || t.IsSetSplit(i) {
				continue
			}
			if fl := math.Floor(t.Threshold[i]); fl != t.Threshold[i] {
				t.Threshold[i] = fl
				changed++
			}
		}
		g.Trees[ti] = t
	}
	return &g, changed, nil
}
