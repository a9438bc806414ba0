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
		want := make([]float64, f.NumOutputs())
		f.Predict(x, want)
		pr := sqltarget.Probe{X: x, Want: want, Class: -1}
		if f.IsClassifier() {
			pr.Class = f.ClassOf(want)
		}
		out = append(out, pr)
	}
	return out
}
