package forest_test

import (
	"fmt"
	"strings"

	"github.com/sawmill-dev/sawmill/forest"
)

// pumpModel is a small classifier of the invented pump-health scenario
// (the demo's): two trees, one on vibration, one on bearing temperature.
const pumpModel = `{"sawmill_forest": 1, "task": "classification",
 "features": ["vibration_rms", "bearing_temp_c"], "classes": ["healthy", "bearing_wear"],
 "combine": "average",
 "trees": [
  {"feature": [0, -1, -1], "threshold": [2.5, 0, 0], "left": [1, -1, -1], "right": [2, -1, -1],
   "missing_left": [true, false, false], "value": [[0, 0], [0.9, 0.1], [0.2, 0.8]]},
  {"feature": [1, -1, -1], "threshold": [70, 0, 0], "left": [1, -1, -1], "right": [2, -1, -1],
   "value": [[0, 0], [1, 0], [0.3, 0.7]]}]}`

// Read a model and score a row with the reference interpreter.
func ExampleRead() {
	f, err := forest.Read(strings.NewReader(pumpModel), "pump.json")
	if err != nil {
		fmt.Println(err)
		return
	}
	x := []float64{3.1, 65} // vibration_rms, bearing_temp_c
	out := make([]float64, f.NumOutputs())
	f.Predict(x, out)
	fmt.Println(f.Classes, out, f.Classes[f.PredictClass(x)])
	// Output: [healthy bearing_wear] [0.6 0.4] healthy
}

// A model that breaks the format is an error naming the file and the place
// in it.
func ExampleRead_invalid() {
	_, err := forest.Read(strings.NewReader(strings.Replace(pumpModel, "[2.5, 0, 0]", "[2.5, 0]", 1)), "pump.json")
	fmt.Println(err)
	// Output: pump.json: tree 0: "threshold" has 2 entries but "left" has 3
}

// Read rows from CSV: columns are matched to features by name, an empty
// cell is a missing value (NaN), and other columns can be kept.
func ExampleReadRows() {
	csv := "pump_id,bearing_temp_c,vibration_rms\nP-7,64.5,1.2\nP-9,,4.0\n"
	rows, err := forest.ReadRows(strings.NewReader(csv), "readings.csv",
		[]string{"vibration_rms", "bearing_temp_c"}, forest.RowOptions{Keep: []string{"pump_id"}})
	if err != nil {
		fmt.Println(err)
		return
	}
	for i := range rows.Len() {
		fmt.Println(rows.Extra[i][0], rows.Row(i), "line", rows.Line[i])
	}
	// Output:
	// P-7 [1.2 64.5] line 2
	// P-9 [4 NaN] line 3
}
