package source

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// FuzzONNX holds the ONNX reader to its promise: whatever the bytes, no
// panic, no hang, memory in proportion to the file, and a model that is
// returned passes validation and scores a row. Run it with
//
//	go test ./source -run '^$' -fuzz '^FuzzONNX$' -fuzztime 10m -parallel 1
//
// Seeds are the committed corpus under testdata/fuzz/FuzzONNX and a few of
// the fixtures.
func FuzzONNX(f *testing.F) {
	for _, d := range []string{"hand-modes-sum", "hand-binary-positive-none", "skl-gb-binary", "lgb-wine", "hand-v5-modes-sum"} {
		data, err := os.ReadFile(filepath.Join("testdata", "onnx", d, "model.onnx"))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, from := range []string{"", "onnx"} {
			var r *Result
			var err error
			start := time.Now()
			got := allocatedBytes(func() { r, err = Decode(data, "fuzz", from, Options{}) })
			if d := time.Since(start); d > 2*time.Second {
				t.Fatalf("%q: %v to read %d bytes", from, d, len(data))
			}
			// Every node of the file is a few bytes of protobuf; the reader
			// keeps its attributes, a tree of nodes and the forest's
			// arrays, and an equality test on a non-integer copies a
			// subtree (at most 4 nodes of output per node of input).
			if bound := 512*uint64(len(data)) + 1<<21; got > bound {
				t.Fatalf("%q: %d bytes allocated for %d bytes of input (bound %d)", from, got, len(data), bound)
			}
			if err != nil {
				if !strings.HasPrefix(err.Error(), "fuzz: ") {
					t.Fatalf("%q: error does not name the file: %v", from, err)
				}
				continue
			}
			fo := r.Forest
			if err := fo.Validate("again"); err != nil {
				t.Fatalf("%q: accepted a model that does not validate: %v", from, err)
			}
			out := make([]float64, fo.NumOutputs())
			fo.Predict(make([]float64, len(fo.Features)), out)
		}
	})
}
