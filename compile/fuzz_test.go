package compile

import (
	"bytes"
	"encoding/binary"
	"hash/fnv"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/sawmill-dev/sawmill/forest"
)

// The fuzz targets hold the compiled Program against the interpreter bit for
// bit, for both comparison forms: Options{} on the rows as given, and
// SingleInputs on the rows rounded to float32 (the inputs a float target
// receives). Run one with
//
//	go test ./compile -run '^$' -fuzz '^FuzzCompileDecode$' -fuzztime 10m -parallel 1

// checkExact compiles f both ways and compares Eval with Predict on rows.
func checkExact(t *testing.T, f *forest.Forest, rows [][]float64) {
	t.Helper()
	k := f.NumOutputs()
	want, got := make([]float64, k), make([]float64, k)
	x := make([]float64, len(f.Features))
	for _, single := range []bool{false, true} {
		p, _, err := Compile(f, Options{SingleInputs: single})
		if err != nil {
			t.Fatalf("compile (SingleInputs %v): %v", single, err)
		}
		for r, row := range rows {
			copy(x, row)
			if single {
				for j := range x {
					x[j] = float64(float32(x[j]))
				}
			}
			f.Predict(x, want)
			Eval(p, x, got)
			for j := range want {
				if math.Float64bits(want[j]) != math.Float64bits(got[j]) && !(math.IsNaN(want[j]) && math.IsNaN(got[j])) {
					t.Fatalf("SingleInputs %v, row %d %v, output %d: Eval %v (%#x), interpreter %v (%#x)",
						single, r, x, j, got[j], math.Float64bits(got[j]), want[j], math.Float64bits(want[j]))
				}
			}
		}
	}
}

func encodeForest(f *forest.Forest) []byte {
	var b bytes.Buffer
	if err := f.Encode(&b); err != nil {
		panic(err)
	}
	return b.Bytes()
}

// FuzzCompileDecode reads a model from the fuzz bytes; whatever the reader
// accepts must compile, and compile exactly.
func FuzzCompileDecode(f *testing.F) {
	matches, _ := filepath.Glob("../golden/testdata/*/model.json")
	for _, m := range matches {
		if b, err := os.ReadFile(m); err == nil && len(b) < 20_000 {
			f.Add(b)
		}
	}
	for seed := uint64(0); seed < 8; seed++ {
		f.Add(encodeForest(randomForest(rand.New(rand.NewPCG(seed, 1)))))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		fo, err := forest.Decode(data, "fuzz.json", forest.ReadOptions{MaxNodes: 20_000})
		if err != nil {
			return
		}
		h := fnv.New64a()
		h.Write(data)
		rng := rand.New(rand.NewPCG(h.Sum64(), 2))
		checkExact(t, fo, randomRows(rng, fo, 64))
	})
}

// FuzzCompileSeed builds a forest from a seed and reads rows from the fuzz
// bytes (eight bytes a value), on top of the generator's adversarial rows.
func FuzzCompileSeed(f *testing.F) {
	one := func(vs ...float64) []byte {
		var b []byte
		for _, v := range vs {
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
		}
		return b
	}
	f.Add(uint64(0), []byte{})
	f.Add(uint64(1), one(math.NaN(), 0, math.Copysign(0, -1), math.Inf(1)))
	f.Add(uint64(2), one(5e-324, 3.4028235677973366e38, -3.4028235677973366e38, 1e300))
	f.Add(uint64(3), one(0.1, float64(float32(0.1)), math.Nextafter(0.1, 1)))
	f.Fuzz(func(t *testing.T, seed uint64, extra []byte) {
		rng := rand.New(rand.NewPCG(seed, 3))
		fo := randomForest(rng)
		rows := randomRows(rng, fo, 64)
		nf := len(fo.Features)
		for len(extra) >= 8*nf {
			row := make([]float64, nf)
			for j := range row {
				row[j] = math.Float64frombits(binary.LittleEndian.Uint64(extra[8*j:]))
			}
			rows = append(rows, row)
			extra = extra[8*nf:]
		}
		checkExact(t, fo, rows)
	})
}
