package source_test

import (
	"fmt"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/source"
)

// Load a model saved by XGBoost (3.2.0, binary:logistic on the Breast
// Cancer Wisconsin data, a committed fixture) as a forest.Forest, whatever
// its format, and score a row as XGBoost's predict() does: 0.17764443159103394
// is what XGBoost recorded for the first row (predictions.csv).
func ExampleLoad() {
	dir := "testdata/xgboost/x3_binary_logistic/"
	r, err := source.Load(dir+"model.json", "", source.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	f := r.Forest
	fmt.Println(r.Format, len(f.Trees), "trees,", len(f.Features), "features")
	rows, err := forest.ReadRowsFile(dir+"rows.csv", f.Features, forest.RowOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	out := make([]float64, f.NumOutputs())
	f.Predict(rows.Row(0), out)
	fmt.Println(out[0])
	// Output:
	// xgboost-json 4 trees, 10 features
	// 0.17764443159103394
}
