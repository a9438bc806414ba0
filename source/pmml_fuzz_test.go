package source

import (
	"strings"
	"testing"
	"time"
)

// FuzzPMML holds the PMML reader to its promise: whatever the bytes, no
// panic, no hang, memory in proportion to the file, and a model that is
// returned passes validation and scores a row. Run it with
//
//	go test ./source -run '^$' -fuzz '^FuzzPMML$' -fuzztime 10m -parallel 1
//
// Seeds are the committed corpus under testdata/fuzz/FuzzPMML and the
// hand-written fixtures.
func FuzzPMML(f *testing.F) {
	for _, d := range []string{"hand-compound", "hand-default-child", "hand-last-prediction-sets", "hand-vote-replacement", "hand-mixed-precision"} {
		f.Add(pmmlFixture(f, d))
	}
	f.Add([]byte(`<PMML version="4.4"><DataDictionary><DataField name="a" dataType="double"/><DataField name="y" dataType="double"/></DataDictionary>` +
		`<MiningModel functionName="regression"><MiningSchema><MiningField name="a"/></MiningSchema><Targets><Target rescaleFactor="2" rescaleConstant="1"/></Targets>` +
		`<Segmentation multipleModelMethod="sum"><Segment><True/><TreeModel functionName="regression"><MiningSchema><MiningField name="a"/></MiningSchema>` +
		`<Node score="1"><True/><Node score="2"><SimplePredicate field="a" operator="equal" value="3"/></Node></Node></TreeModel></Segment></Segmentation></MiningModel></PMML>`))
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, from := range []string{"", "pmml"} {
			var r *Result
			var err error
			start := time.Now()
			got := allocatedBytes(func() { r, err = Decode(data, "fuzz", from, Options{}) })
			if d := time.Since(start); d > 2*time.Second {
				t.Fatalf("%q: %v to read %d bytes", from, d, len(data))
			}
			// An element of four bytes ("<a/>") costs encoding/xml's token
			// and our element, a few hundred bytes; a laid-out tree may
			// reach pmmlBlowUp times its Nodes.
			if bound := 2048*uint64(len(data)) + 4<<20; got > bound {
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
	})
}
