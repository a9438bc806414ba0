package source

import (
	"strings"
	"testing"
	"testing/fstest"
	"time"
)

// FuzzSpark holds the Spark reader to its promise on the metadata JSON, the
// part a user most often edits by hand: whatever the bytes, no panic, no
// hang, memory in proportion to the input, and a model that is returned
// passes validation and scores a row. Each input is tried as the metadata
// of a decision tree, a GBT model and a pipeline's assembler stage, with
// the fixture's real parquet data beside it. Run it with
//
//	go test ./source -run '^$' -fuzz '^FuzzSpark$' -fuzztime 10m -parallel 1
func FuzzSpark(f *testing.F) {
	bases := map[string]fstest.MapFS{}
	for _, b := range []string{"dt_diabetes_cat", "gbt_cancer", "pipeline_rf_wine"} {
		bases[b] = sparkFS(f, b)
	}
	for _, m := range bases {
		for k, v := range m {
			if strings.HasSuffix(k, "metadata/part-00000") && !strings.Contains(k, "trees") {
				f.Add(v.Data)
			}
		}
	}
	f.Add([]byte(`{"class":"org.apache.spark.ml.regression.DecisionTreeRegressionModel","numFeatures":1e9}`))
	f.Add([]byte(`{"class":"org.apache.spark.ml.classification.RandomForestClassificationModel","numFeatures":10,"numClasses":2,"numTrees":-1}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		for b, base := range bases {
			m := fstest.MapFS{}
			for k, v := range base {
				m[k] = v
			}
			key := "metadata/part-00000"
			if b == "pipeline_rf_wine" {
				for k := range base {
					if strings.HasPrefix(k, "stages/0_") {
						key = k
					}
				}
			}
			m[key] = &fstest.MapFile{Data: data}
			start := time.Now()
			var r *Result
			var err error
			got := allocatedBytes(func() { r, err = readSpark(m, "fuzz", Options{}) })
			if d := time.Since(start); d > 2*time.Second {
				t.Fatalf("%s: %v to read %d bytes of metadata", b, d, len(data))
			}
			// The fixture's parquet files are read whatever the metadata
			// says (a few MB at most), what the JSON decoder takes, and up
			// to sparkMaxFeatures feature names (about 100 bytes each with
			// validation's map).
			if bound := 64*uint64(len(data)) + 100*sparkMaxFeatures + 64<<20; got > bound {
				t.Fatalf("%s: %d bytes allocated for %d bytes of metadata (bound %d)", b, got, len(data), bound)
			}
			if err != nil {
				if !strings.HasPrefix(err.Error(), "fuzz") {
					t.Fatalf("%s: error does not name the folder: %v", b, err)
				}
				continue
			}
			fo := r.Forest
			if err := fo.Validate("again"); err != nil {
				t.Fatalf("%s: accepted a model that does not validate: %v", b, err)
			}
			out := make([]float64, fo.NumOutputs())
			fo.Predict(make([]float64, len(fo.Features)), out)
		}
	})
}
