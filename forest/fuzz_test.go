package forest

import (
	"bytes"
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
	"time"
)

// The fuzz targets hold the readers to the format page's promise: a reader
// never panics, never loops forever, and holds memory in proportion to the
// file. Run one with
//
//	go test ./forest -run '^$' -fuzz '^FuzzDecode$' -fuzztime 10m -parallel 1
//
// Seeds are the committed corpus under testdata/fuzz and the f.Add calls.

// allocBound is how many bytes a reader may allocate for n bytes of input:
// 64 per input byte plus a constant for fixed costs.
func allocBound(n int) uint64 { return 64*uint64(n) + 1<<20 }

// allocated runs fn and returns the bytes it allocated (runtime.MemStats
// TotalAlloc difference, so freed memory counts too: an upper bound on the
// peak).
func allocated(fn func()) uint64 {
	var a, b runtime.MemStats
	runtime.ReadMemStats(&a)
	fn()
	runtime.ReadMemStats(&b)
	return b.TotalAlloc - a.TotalAlloc
}

// slowInput is how long one fuzz input may take before it counts as a hang.
// Inputs are at most a few hundred kilobytes, read in linear time.
const slowInput = 10 * time.Second

// fileSeeds returns the contents of the files matching the patterns, up to
// 100 kB each.
func fileSeeds(patterns ...string) [][]byte {
	var out [][]byte
	for _, p := range patterns {
		matches, _ := filepath.Glob(p)
		for _, m := range matches {
			if b, err := os.ReadFile(m); err == nil && len(b) < 100_000 {
				out = append(out, b)
			}
		}
	}
	return out
}

func FuzzDecode(f *testing.F) {
	for _, b := range fileSeeds("testdata/*.json", "../golden/testdata/*/model.json") {
		f.Add(b)
	}
	f.Add([]byte(`{"sawmill_forest":1,"task":"regression","features":["x"],"trees":[{"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}]}`))
	f.Add([]byte(`{"sawmill_forest":1,"task":"classification","features":["a","b"],"classes":["p","q"],"output_transform":"logistic","combine":"sum","trees":[{"feature":[0,-1,-1],"threshold":[0.5,0,0],"left":[1,-1,-1],"right":[2,-1,-1],"missing_left":[true,false,false],"value":[[0],[-1],[1]]}]}`))
	f.Add([]byte(`{"sawmill_forest":1,"task":"regression","features":["x"],"trees":[{"feature":[0,0],"threshold":[1,1],"left":[1,0],"right":[1,0],"value":[[0],[0]]}]}`))
	f.Add([]byte(`{"sawmill_forest":1,"task":"classification","features":["x"],"classes":["a","b","c"],"trees":[{"feature":[-1,7],"threshold":[0,1e999],"left":[-1,1],"right":[-1,5],"value":[[1,2,3],[]]}]}`))
	// Version 2: every key, set splits under each category_match,
	// per-output trees, float32 accumulation, and near-misses of each rule.
	f.Add([]byte(`{"sawmill_forest":2,"task":"classification","features":["a","b"],"classes":["p","q","r"],"input_precision":"float32","accumulate":"float32","combine":"sum","output_transform":"softmax","transform_scale":0.5,"category_match":"truncate","missing_value":-999,"base_score":[0.5,0.5,0.5],"trees":[{"output":0,"feature":[0,1,-1,-1,-1],"threshold":[0,2.5,0,0,0],"left":[1,3,-1,-1,-1],"right":[2,4,-1,-1,-1],"missing_left":[true,false,false,false,false],"zero_missing":[false,true,false,false,false],"categories":[[0,3,2147483647],null,null,null,null],"value":[[0],[0],[1],[0.25],[-2]]},{"output":2,"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]},{"output":1,"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}]}`))
	f.Add([]byte(`{"sawmill_forest":2,"task":"regression","features":["x"],"outputs":3,"combine":"average","output_transform":"normalize","category_match":"exact","trees":[{"feature":[0,-1,-1],"threshold":[0,0,0],"left":[1,-1,-1],"right":[2,-1,-1],"categories":[[],null,null],"value":[[0,0,0],[1,2,3],[3,2,1]]},{"output":1,"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[2]]}]}`))
	f.Add([]byte(`{"sawmill_forest":2,"task":"regression","features":["x"],"accumulate":"float32","output_transform":"exp","trees":[{"feature":[0,-1,-1],"threshold":[0,0,0],"left":[1,-1,-1],"right":[2,-1,-1],"categories":[[2,1],null,null],"value":[[0],[0.1],[1e39]]}]}`))
	f.Add([]byte(`{"sawmill_forest":2,"task":"classification","features":["x"],"classes":["a","b"],"combine":"vote","output_transform":"logistic_each","missing_value":0,"trees":[{"output":5,"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}],"input_precison":"float32"}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		var fo *Forest
		var err error
		start := time.Now()
		n := allocated(func() { fo, err = Decode(data, "fuzz.json", ReadOptions{MaxNodes: 1 << 20}) })
		if d := time.Since(start); d > slowInput {
			t.Fatalf("Decode took %v on %d bytes", d, len(data))
		}
		if n > allocBound(len(data)) {
			t.Fatalf("Decode allocated %d bytes for %d bytes of input (bound %d)", n, len(data), allocBound(len(data)))
		}
		if err != nil {
			if msg := err.Error(); !strings.HasPrefix(msg, "fuzz.json: ") {
				t.Fatalf("error does not start with the file name: %q", msg)
			}
			return
		}
		if err := fo.Validate("fuzz.json"); err != nil {
			t.Fatalf("Decode accepted a forest that Validate rejects: %v", err)
		}
		// What it reads, it writes, and reads back to the same bytes.
		var a, b bytes.Buffer
		if err := fo.Encode(&a); err != nil {
			t.Fatalf("Encode: %v", err)
		}
		back, err := Decode(a.Bytes(), "again.json", ReadOptions{})
		if err != nil {
			t.Fatalf("the encoded forest does not read back: %v\n%s", err, a.Bytes())
		}
		if err := back.Encode(&b); err != nil || !bytes.Equal(a.Bytes(), b.Bytes()) {
			t.Fatalf("encode, decode, encode is not stable (%v)", err)
		}
		if v := fo.Version(); v != back.Version() || (v == 2) != bytes.Contains(a.Bytes(), []byte(`"sawmill_forest": 2,`)) {
			t.Fatalf("version %d written as %q", v, a.Bytes()[:min(40, a.Len())])
		}
		// Scoring terminates on every kind of input; under float32
		// accumulation every output is a float32 value.
		out := make([]float64, fo.NumOutputs())
		for _, v := range []float64{0, math.NaN(), math.Inf(1), math.Inf(-1), math.Copysign(0, -1), -0.5, 3, 1 << 31} {
			x := make([]float64, len(fo.Features))
			for i := range x {
				x[i] = v
			}
			fo.Predict(x, out)
			if fo.Float32Accumulate() {
				for _, o := range out {
					if o == o && o != Round32(o) {
						t.Fatalf("float32 accumulation gave %v, not a float32", o)
					}
				}
			}
		}
	})
}

func FuzzReadRows(f *testing.F) {
	for _, b := range fileSeeds("../golden/testdata/edge-*/rows.csv") {
		header, _, _ := bytes.Cut(b, []byte("\n"))
		f.Add(b, string(header))
	}
	f.Add([]byte("a,b\n1,2\n"), "a,b")
	f.Add([]byte("\ufeffb , a\n,NaN\ninf,-inf\n-0,1e-320\n"), "a,b")
	f.Add([]byte("x,\"y\"\"z\"\n\"1\n\",2\n3\n"), "x,y\"z")
	f.Add([]byte("a\n1e400\nabc\n0x1p-3\n"), "a")
	f.Add([]byte("a,a\n1,2\n"), "a,a")
	f.Fuzz(func(t *testing.T, data []byte, featureList string) {
		features := strings.Split(featureList, ",")
		if len(features) > 64 {
			return // a model's feature list is not what this target explores
		}
		var rows *Rows
		var err error
		start := time.Now()
		n := allocated(func() { rows, err = ReadRows(bytes.NewReader(data), "fuzz.csv", features, RowOptions{}) })
		if d := time.Since(start); d > slowInput {
			t.Fatalf("ReadRows took %v on %d bytes", d, len(data))
		}
		// Every row holds one value per feature: 8 bytes per feature per
		// row, and a row takes at least one byte of input.
		if bound := allocBound(len(data)) * uint64(len(features)); n > bound {
			t.Fatalf("ReadRows allocated %d bytes for %d bytes of input and %d features (bound %d)", n, len(data), len(features), bound)
		}
		if err != nil {
			if !strings.HasPrefix(err.Error(), "fuzz.csv") {
				t.Fatalf("error does not start with the file name: %q", err)
			}
			return
		}
		if len(rows.Values) != rows.Len()*len(features) {
			t.Fatalf("%d values for %d rows of %d features", len(rows.Values), rows.Len(), len(features))
		}
		for i := 1; i < len(rows.Line); i++ {
			if rows.Line[i] <= rows.Line[i-1] {
				t.Fatalf("line numbers not increasing: %v", rows.Line)
			}
		}
		// Written back in shortest round-trip form, the rows read back bit
		// for bit (a header naming each feature once).
		uniq := map[string]bool{}
		for _, s := range features {
			// Carriage returns in a quoted header cell read back as line
			// feeds (encoding/csv), a lone empty name is an empty line, and
			// a leading byte-order mark is dropped from the header.
			if uniq[s] || strings.ContainsAny(s, "\r") || s == "" && len(features) == 1 || strings.HasPrefix(features[0], "\ufeff") {
				return
			}
			uniq[s] = true
		}
		var buf bytes.Buffer
		w := csv.NewWriter(&buf)
		w.Write(features)
		rec := make([]string, len(features))
		for i := 0; i < rows.Len(); i++ {
			for j, v := range rows.Row(i) {
				rec[j] = strconv.FormatFloat(v, 'g', -1, 64)
			}
			w.Write(rec)
		}
		w.Flush()
		back, err := ReadRows(&buf, "back.csv", features, RowOptions{})
		if err != nil {
			t.Fatalf("rows written back do not read: %v", err)
		}
		if back.Len() != rows.Len() {
			t.Fatalf("read back %d rows, wrote %d", back.Len(), rows.Len())
		}
		for i, v := range rows.Values {
			w := back.Values[i]
			if math.Float64bits(v) != math.Float64bits(w) && !(math.IsNaN(v) && math.IsNaN(w)) {
				t.Fatalf("value %d: read back %v, wrote %v", i, w, v)
			}
		}
	})
}
