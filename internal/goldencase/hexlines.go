package goldencase

import (
	"fmt"
	"math"

	"github.com/sawmill-dev/sawmill/forest"
)

// HexLines are internal/predicthex's output for one case: "NAME ROW d|f HEX...", d for
// the rows as given, f for the rows rounded to float32.
func HexLines(name string, f *forest.Forest, rows *forest.Rows) []string {
	var out []string
	y := make([]float64, f.NumOutputs())
	x := make([]float64, len(f.Features))
	for _, round := range []bool{false, true} {
		kind := "d"
		if round {
			kind = "f"
		}
		for i := 0; i < rows.Len(); i++ {
			copy(x, rows.Row(i))
			if round {
				for j, v := range x {
					x[j] = float64(float32(v))
				}
			}
			f.Predict(x, y)
			l := fmt.Sprintf("%s %d %s", name, i, kind)
			for _, v := range y {
				l += fmt.Sprintf(" %016x", math.Float64bits(v))
			}
			out = append(out, l)
		}
	}
	return out
}
