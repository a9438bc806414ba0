package source

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"strconv"
	"testing"
)

// pmmlBigModel writes a PMML MiningModel that sums trees complete trees of
// the given depth over 20 float fields, laid out as sklearn2pmml writes a
// gradient-boosted regressor: each split a Node whose first child tests
// lessOrEqual and whose second is True, scores of 17 digits.
func pmmlBigModel(trees, depth int) []byte {
	rng := rand.New(rand.NewPCG(5, 5))
	var b bytes.Buffer
	b.WriteString("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<PMML xmlns=\"http://www.dmg.org/PMML-4_4\" version=\"4.4\">\n\t<DataDictionary>\n")
	b.WriteString("\t\t<DataField name=\"y\" optype=\"continuous\" dataType=\"double\"/>\n")
	for i := range 20 {
		fmt.Fprintf(&b, "\t\t<DataField name=\"x%d\" optype=\"continuous\" dataType=\"float\"/>\n", i)
	}
	b.WriteString("\t</DataDictionary>\n\t<MiningModel functionName=\"regression\">\n\t\t<MiningSchema>\n\t\t\t<MiningField name=\"y\" usageType=\"target\"/>\n")
	for i := range 20 {
		fmt.Fprintf(&b, "\t\t\t<MiningField name=\"x%d\"/>\n", i)
	}
	b.WriteString("\t\t</MiningSchema>\n\t\t<Targets>\n\t\t\t<Target field=\"y\" rescaleConstant=\"152.13348416289594\" rescaleFactor=\"0.1\"/>\n\t\t</Targets>\n")
	b.WriteString("\t\t<Segmentation multipleModelMethod=\"sum\" missingPredictionTreatment=\"returnMissing\">\n")
	var node func(d int, pred string)
	node = func(d int, pred string) {
		tab := bytes.Repeat([]byte("\t"), 5+depth-d)
		if d == 0 {
			fmt.Fprintf(&b, "%s<Node score=\"%s\">%s</Node>\n", tab, strconv.FormatFloat(rng.NormFloat64(), 'g', 17, 64), pred)
			return
		}
		fmt.Fprintf(&b, "%s<Node>\n%s\t%s\n", tab, tab, pred)
		node(d-1, fmt.Sprintf("<SimplePredicate field=\"x%d\" operator=\"lessOrEqual\" value=\"%s\"/>", rng.IntN(20), strconv.FormatFloat(float64(float32(rng.NormFloat64())), 'g', -1, 32)))
		node(d-1, "<True/>")
		fmt.Fprintf(&b, "%s</Node>\n", tab)
	}
	for t := range trees {
		fmt.Fprintf(&b, "\t\t\t<Segment id=\"%d\">\n\t\t\t\t<True/>\n\t\t\t\t<TreeModel functionName=\"regression\" missingValueStrategy=\"nullPrediction\" noTrueChildStrategy=\"returnLastPrediction\">\n\t\t\t\t\t<MiningSchema>\n", t+1)
		for i := range 20 {
			fmt.Fprintf(&b, "\t\t\t\t\t\t<MiningField name=\"x%d\"/>\n", i)
		}
		b.WriteString("\t\t\t\t\t</MiningSchema>\n")
		node(depth, "<True/>")
		b.WriteString("\t\t\t\t</TreeModel>\n\t\t\t</Segment>\n")
	}
	b.WriteString("\t\t</Segmentation>\n\t</MiningModel>\n</PMML>\n")
	return b.Bytes()
}

// BenchmarkPMMLImport reads a 1,000-tree depth-8 PMML model (511,000
// nodes) with the figures benchmarkImport reports:
//
//	go test ./source -run '^$' -bench PMMLImport -benchtime 3x
func BenchmarkPMMLImport(b *testing.B) {
	benchmarkImport(b, pmmlBigModel(1000, 8), "big.pmml")
}
