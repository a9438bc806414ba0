package gotarget_test

import (
	"fmt"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// Read a model, compile it and emit a Go package: model.go with Predict
// and PredictClass, batch.go with PredictBatch and PredictBatchWorkers, and
// model_test.go, which checks rows recorded at emit time. Emit writes nothing to disk; the caller writes the files.
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
	files, err := gotarget.Emit(p, gotarget.Options{Package: "pumphealth", Layout: "nested"})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, file := range files {
		fmt.Println(file.Name, len(file.Data) > 0)
	}
	for _, line := range strings.Split(string(files[0].Data), "\n") {
		if strings.HasPrefix(line, "package ") || strings.HasPrefix(line, "func ") && line[5] >= 'A' && line[5] <= 'Z' {
			fmt.Println(line)
		}
	}
	// Output:
	// model.go true
	// batch.go true
	// model_test.go true
	// package pumphealth
	// func Predict(x *[NumFeatures]float64) [NumOutputs]float64 {
	// func PredictClass(x *[NumFeatures]float64) int {
}
