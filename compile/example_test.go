package compile_test

import (
	"fmt"
	"os"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// pumpModel is a small classifier of the invented pump-health scenario
// (the demo's); its second tree tests vibration twice, and the inner test
// can never fail.
const pumpModel = `{"sawmill_forest": 1, "task": "classification",
 "features": ["vibration_rms", "bearing_temp_c"], "classes": ["healthy", "bearing_wear"],
 "combine": "average",
 "trees": [
  {"feature": [0, -1, -1], "threshold": [2.5, 0, 0], "left": [1, -1, -1], "right": [2, -1, -1],
   "missing_left": [true, false, false], "value": [[0, 0], [0.9, 0.1], [0.2, 0.8]]},
  {"feature": [0, 0, -1, -1, -1], "threshold": [2, 3, 0, 0, 0], "left": [1, 2, -1, -1, -1], "right": [4, 3, -1, -1, -1],
   "value": [[0, 0], [0, 0], [1, 0], [0, 1], [0.3, 0.7]]}]}`

// Compile a model: lower it to the Program and run the exact passes, which
// here prune the split that x <= 2 has already decided and leave
// bearing_temp_c unused. The text form shows the result.
func ExampleCompile() {
	f, err := forest.Read(strings.NewReader(pumpModel), "pump.json")
	if err != nil {
		fmt.Println(err)
		return
	}
	p, stats, err := compile.Compile(f, compile.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, s := range stats {
		if s.Ran && s.NodesAfter != s.NodesBefore {
			fmt.Printf("%s: %d nodes -> %d\n", s.Pass, s.NodesBefore, s.NodesAfter)
		}
	}
	if err := compile.Format(os.Stdout, p); err != nil {
		fmt.Println(err)
	}
	// Output:
	// prune: 8 nodes -> 6
	// program classification outputs=2 combine=average transform=none compare=double base=0,0
	// feature "vibration_rms" used
	// feature "bearing_temp_c" unused
	// class "healthy"
	// class "bearing_wear"
	// tree 0
	//   0 #0 x0 <= 2.5 missing=left ? 1 : 2
	//   1 #1 leaf 0.9,0.1
	//   2 #2 leaf 0.2,0.8
	// tree 1
	//   0 #0 x0 <= 2 missing=right ? 1 : 2
	//   1 #2 leaf 1,0
	//   2 #4 leaf 0.3,0.7
}

// Eval scores a Program as a target would; every exact pass keeps its
// outputs bit-identical to the interpreter's.
func ExampleEval() {
	f, _ := forest.Read(strings.NewReader(pumpModel), "pump.json")
	p, _, _ := compile.Compile(f, compile.Options{})
	x := []float64{1.5, 80}
	got, want := make([]float64, 2), make([]float64, 2)
	compile.Eval(p, x, got)
	f.Predict(x, want)
	fmt.Println(got, want)
	// Output: [0.95 0.05] [0.95 0.05]
}
