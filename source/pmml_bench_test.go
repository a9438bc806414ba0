package source

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"runtime"
	"strconv"
	"syscall"
	"testing"
	"time"
)

// cpuTime is the CPU time (user and system) the process has used: on a
// shared machine it says what a read costs when wall time does not.
func cpuTime() time.Duration {
	var u syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &u); err != nil {
		return 0
	}
	return time.Duration(u.Utime.Nano() + u.Stime.Nano())
}

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
// nodes) and reports the heap in use after the read and the bytes
// allocated per read, and the CPU time per read (user and system, over
// every thread, the garbage collector's included):
//
//	go test ./source -run '^$' -bench PMMLImport -benchtime 3x
func BenchmarkPMMLImport(b *testing.B) {
	data := pmmlBigModel(1000, 8)
	b.SetBytes(int64(len(data)))
	runtime.GC()
	var m0 runtime.MemStats
	runtime.ReadMemStats(&m0)
	b.ResetTimer()
	cpu0 := cpuTime()
	var r *Result
	for range b.N {
		var err error
		r, err = Decode(data, "big.pmml", "", Options{})
		if err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	b.ReportMetric((cpuTime()-cpu0).Seconds()/float64(b.N), "cpu-s/op")
	var m1 runtime.MemStats
	runtime.ReadMemStats(&m1)
	nodes := 0
	for i := range r.Forest.Trees {
		nodes += r.Forest.Trees[i].NumNodes()
	}
	b.ReportMetric(float64(nodes), "nodes")
	b.ReportMetric(float64(m1.TotalAlloc-m0.TotalAlloc)/float64(b.N)/(1<<20), "alloc-MB/op")
	runtime.GC()
	runtime.ReadMemStats(&m1)
	b.ReportMetric(float64(m1.HeapInuse)/(1<<20), "heap-MB-after")
	b.ReportMetric(float64(len(data))/(1<<20), "file-MB")
}
