package source

import (
	"testing"
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
		// An element of four bytes ("<a/>") costs the element and its
		// attributes, about 200 bytes; a laid-out tree may reach
		// pmmlBlowUp times its Nodes, each node slot about 100 bytes.
		for _, from := range []string{"", "pmml"} {
			fuzzDecode(t, data, from, 2048, 1<<20)
		}
	})
}
