package verify

import (
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// CSelftestRows caps the probe rows of NAME_selftest.c: a board's flash
// holds them (at most 256 rows of 8 bytes a feature and an output, 2 KiB
// for each feature and output), where SQL's self-test takes
// DefaultMaxRows.
const CSelftestRows = 256

// CSelftestProbes is what ctarget.Selftest takes for f (and what `sawmill
// compile --target c --selftest` hands it): the rows Verify generates
// (ProbeRows, at most CSelftestRows, thinned evenly), each with the
// interpreter's outputs and class. For float C (float32 set) every value is
// first rounded to float, which is all the float API receives, and the
// outputs are the interpreter's on the rounded row.
func CSelftestProbes(f *forest.Forest, float32Inputs bool) []ctarget.Probe {
	leaves, thresholds, _ := ProbeRows(f, CSelftestRows)
	var out []ctarget.Probe
	for _, x := range append(leaves, thresholds...) {
		if float32Inputs {
			r := make([]float64, len(x))
			for j, v := range x {
				r[j] = float64(float32(v))
			}
			x = r
		}
		want, class := interpret(f, x)
		out = append(out, ctarget.Probe{X: x, Want: want, Class: class})
	}
	return out
}
