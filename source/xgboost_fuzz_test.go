package source

import (
	"runtime"
	"strings"
	"testing"
	"time"
)

// FuzzXGBoost holds the XGBoost readers to their promise: whatever the bytes,
// no panic, no hang, memory in proportion to the file, and a model that is
// returned passes validation and scores a row. Run it with
//
//	go test ./source -run '^$' -fuzz '^FuzzXGBoost$' -fuzztime 10m -parallel 1
//
// Seeds are the committed corpus under testdata/fuzz and the fixtures below.
func FuzzXGBoost(f *testing.F) {
	for _, d := range []string{"seed_x3", "seed_x17"} {
		f.Add(xgbFile(f, d, "model.json"))
		f.Add(xgbFile(f, d, "model.ubj"))
	}
	f.Add([]byte(`{"learner":{"objective":{"name":"reg:squarederror"},"learner_model_param":{"num_feature":"1","base_score":"5E-1"},` +
		`"gradient_booster":{"name":"gbtree","model":{"trees":[{"left_children":[1,-1,-1],"right_children":[2,-1,-1],` +
		`"split_indices":[0,0,0],"split_conditions":[NaN,1,2],"default_left":[1,0,0]}],"tree_info":[0]}}},"version":[3,2,0]}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		// 256 bytes per input byte: one parsed value of a one-byte UBJSON
		// element takes about 120, and the tree arrays are copied once
		// into the forest.
		fuzzDecode(t, data, []string{"", "xgboost-json", "xgboost-ubjson"}, 256)
	})
}

// fuzzDecode reads data as a model file named "fuzz", once for each format
// in froms ("" detects it), and fails when a read takes over 2 s, allocates
// more than perByte bytes per input byte (plus 1 MiB), returns an error that
// does not start with the file's name, or returns a model that does not
// validate or cannot score a row of zeros.
func fuzzDecode(t *testing.T, data []byte, froms []string, perByte uint64) {
	for _, from := range froms {
		var r *Result
		var err error
		start := time.Now()
		got := allocatedBytes(func() { r, err = Decode(data, "fuzz", from, Options{}) })
		if d := time.Since(start); d > 2*time.Second {
			t.Fatalf("%q: %v to read %d bytes", from, d, len(data))
		}
		if bound := perByte*uint64(len(data)) + 1<<20; got > bound {
			t.Fatalf("%q: %d bytes allocated for %d bytes of input (bound %d)", from, got, len(data), bound)
		}
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz:") {
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
}

// allocatedBytes runs fn and returns the bytes it allocated (TotalAlloc, so
// an upper bound on the peak).
func allocatedBytes(fn func()) uint64 {
	var a, b runtime.MemStats
	runtime.ReadMemStats(&a)
	fn()
	runtime.ReadMemStats(&b)
	return b.TotalAlloc - a.TotalAlloc
}
