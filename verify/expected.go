package verify

import (
	"math"

	"github.com/sawmill-dev/sawmill/forest"
)

// Agreement is how one scorer (the interpreter, or a target) agrees with
// outputs recorded by the library that trained the model
// (VerifyOptions.Expected).
type Agreement struct {
	Source    string `json:"source"`    // where the outputs came from: "OUTPUTS.csv"
	Tolerance Num    `json:"tolerance"` // largest |difference| allowed, the check's own bound included
	Rows      int    `json:"rows"`
	Matches   int    `json:"matches"`
	// MaxAbsDiff is the largest |got - expected| over every output.
	MaxAbsDiff Num  `json:"max_abs_diff"`
	First      *Row `json:"first_mismatch,omitempty"` // Want is the recorded outputs
}

// OK reports whether every row agreed.
func (a *Agreement) OK() bool { return a == nil || a.Matches == a.Rows }

// agree compares got with the recorded outputs of the first len(want)/k
// rows, output by output: NaN agrees with NaN only, infinities with
// themselves, any other pair when |got - want| <= tol.
func agree(f *forest.Forest, rows *forest.Rows, source string, want, got []float64, k int, tol float64) *Agreement {
	n := min(len(want), len(got)) / k
	a := &Agreement{Source: source, Tolerance: Num(tol), Rows: n}
	for i := range n {
		ok, first := true, -1
		for j := range k {
			w, g := want[i*k+j], got[i*k+j]
			d := math.Abs(g - w)
			same := g == w || math.IsNaN(g) && math.IsNaN(w)
			if !same && !math.IsNaN(d) {
				a.MaxAbsDiff = Num(math.Max(float64(a.MaxAbsDiff), d))
			}
			if !same && !(d <= tol) {
				ok = false
				if first < 0 {
					first = j
				}
			}
		}
		if ok {
			a.Matches++
			continue
		}
		if a.First == nil {
			row := &Row{Index: i, Output: first, Origin: rowOrigin(rows, i)}
			if i < len(rows.Line) && rows.Line[i] > 0 {
				row.Line = rows.Line[i]
			}
			for j, v := range rows.Row(i) {
				row.Values = append(row.Values, NamedValue{f.Features[j], Num(v)})
			}
			for j := range k {
				row.Want = append(row.Want, Num(want[i*k+j]))
				row.Got = append(row.Got, Num(got[i*k+j]))
			}
			a.First = row
		}
	}
	return a
}
