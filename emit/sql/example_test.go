package sql_test

import (
	"fmt"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	sqlemit "github.com/sawmill-dev/sawmill/emit/sql"
	"github.com/sawmill-dev/sawmill/forest"
)

// pumpModel is a small classifier of the invented pump-health scenario
// (the demo's).
const pumpModel = `{"sawmill_forest": 1, "task": "classification",
 "features": ["vibration_rms", "bearing_temp_c"], "classes": ["healthy", "bearing_wear"],
 "combine": "average",
 "trees": [
  {"feature": [0, -1, -1], "threshold": [2.5, 0, 0], "left": [1, -1, -1], "right": [2, -1, -1],
   "missing_left": [true, false, false], "value": [[0, 0], [0.9, 0.1], [0.2, 0.8]]},
  {"feature": [1, -1, -1], "threshold": [70, 0, 0], "left": [1, -1, -1], "right": [2, -1, -1],
   "value": [[0, 0], [1, 0], [0.3, 0.7]]}]}`

// Read a model, compile it and emit one SELECT for PostgreSQL over a
// table "readings" whose columns are named like the features; NULL (and a
// stored NaN) is a missing value. Its header says what it reads and
// yields.
func ExampleEmit() {
	f, err := forest.Read(strings.NewReader(pumpModel), "pump.json")
	if err != nil {
		fmt.Println(err)
		return
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	files, err := sqlemit.Emit(p, sqlemit.Options{Dialect: sqlemit.Postgres, Table: "readings", Keep: []string{"pump_id"}})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, file := range files {
		fmt.Println(file.Name)
		for _, line := range strings.Split(string(file.Data), "\n") {
			if strings.HasPrefix(line, "-- Features used") || strings.HasPrefix(line, "-- Result columns") {
				fmt.Println(line)
			}
		}
	}
	// Output:
	// score.sql
	// -- Features used: "vibration_rms" "bearing_temp_c"
	// -- Result columns: "pump_id" "healthy" "bearing_wear" "class"
}
