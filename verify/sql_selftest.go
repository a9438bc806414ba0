package verify

import (
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// SelftestProbes is what sql.Selftest takes for f (and what `sawmill
// compile --selftest` hands it): the rows Verify generates (ProbeRows, at
// most DefaultMaxRows), each with the interpreter's outputs and class.
func SelftestProbes(f *forest.Forest) []sqltarget.Probe {
	leaves, thresholds, _ := ProbeRows(f, DefaultMaxRows)
	var out []sqltarget.Probe
	for _, x := range append(leaves, thresholds...) {
		want, class := interpret(f, x)
		out = append(out, sqltarget.Probe{X: x, Want: want, Class: class})
	}
	return out
}

// interpret is the interpreter's outputs for x and, for a classifier, its
// class (-1 otherwise).
func interpret(f *forest.Forest, x []float64) ([]float64, int) {
	want := make([]float64, f.NumOutputs())
	f.Predict(x, want)
	if f.IsClassifier() {
		return want, f.ClassOf(want)
	}
	return want, -1
}
