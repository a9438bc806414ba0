package source

import (
	"os"
	"path/filepath"
	"testing"
	"unicode/utf8"
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
			// Every node of the file is a few bytes of protobuf; the reader
			// keeps its attributes, a tree of nodes and the forest's
			// arrays, and an equality test on a non-integer copies a
			// subtree (at most 4 nodes of output per node of input).
			fuzzDecode(t, data, from, 512, 1<<21)
			if _, err := Decode(data, "fuzz", from, Options{}); err != nil && !utf8.ValidString(err.Error()) {
				t.Fatalf("%q: the error is not valid UTF-8: %q", from, err.Error())
			}
		}
	})
}
