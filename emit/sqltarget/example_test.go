package sqltarget_test

import (
	"fmt"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// Read a model, compile it and emit one SELECT for PostgreSQL over a
// table "readings" whose columns are named like the features; NULL (and a
// stored NaN) is a missing value. Its header says what it reads and
// yields.
func ExampleEmit() {
	// a small classifier of the invented pump-health scenario (the demo's)
	f, err := forest.ReadFile("../testdata/pump-health.json")
	if err != nil {
		fmt.Println(err)
		return
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	files, err := sqltarget.Emit(p, sqltarget.Options{Dialect: sqltarget.Postgres, Table: "readings", Keep: []string{"pump_id"}})
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
