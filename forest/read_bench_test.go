//go:build unix

package forest

import (
	"bytes"
	"math/rand/v2"
	"runtime"
	"syscall"
	"testing"
)

// bigForest is a forest of random complete trees whose model file is
// about mb megabytes: 20 features, two classes, thresholds of 17 digits.
func bigForest(tb testing.TB, mb int) []byte {
	tb.Helper()
	rng := rand.New(rand.NewPCG(1, 1))
	f := &Forest{Task: Classification, InputPrecision: Float64, Combine: Average, Transform: NoTransform,
		Classes: []string{"healthy", "worn"}, BaseScore: []float64{0, 0}}
	for i := 0; i < 20; i++ {
		f.Features = append(f.Features, "sensor_"+string(rune('a'+i)))
	}
	const depth = 12 // 8191 nodes a tree
	var buf bytes.Buffer
	for buf.Len() < mb<<20 {
		n := 1<<(depth+1) - 1
		t := Tree{Feature: make([]int, n), Threshold: make([]float64, n), Left: make([]int, n), Right: make([]int, n),
			MissingLeft: make([]bool, n), Value: make([]float64, 2*n)}
		for i := 0; i < n; i++ {
			if l := 2*i + 1; l < n {
				t.Feature[i], t.Threshold[i], t.Left[i], t.Right[i] = rng.IntN(20), rng.NormFloat64(), l, l+1
				t.MissingLeft[i] = rng.IntN(2) == 0
			} else {
				t.Feature[i], t.Left[i], t.Right[i] = -1, -1, -1
				p := rng.Float64()
				t.Value[2*i], t.Value[2*i+1] = p, 1-p
			}
		}
		f.Trees = append(f.Trees, t)
		if len(f.Trees)%16 == 0 {
			buf.Reset()
			if err := f.Encode(&buf); err != nil {
				tb.Fatal(err)
			}
		}
	}
	return buf.Bytes()
}

// BenchmarkRead100MB decodes and validates a model file of about 100 MB
// and reports its throughput, the CPU time it took (user and system, all
// threads: on a shared machine wall time alone says little) and the heap
// it leaves in use per input byte:
//
//	go test ./forest -run '^$' -bench Read100MB -benchtime 3x
func BenchmarkRead100MB(b *testing.B) {
	data := bigForest(b, benchMB)
	b.SetBytes(int64(len(data)))
	cpu0 := cpuTime()
	b.ResetTimer()
	var f *Forest
	for i := 0; i < b.N; i++ {
		var err error
		f, err = Decode(data, "big.json", ReadOptions{MaxBytes: int64(len(data)) + 1, MaxNodes: 1 << 30})
		if err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	b.ReportMetric((cpuTime()-cpu0)/float64(b.N), "cpu-s/op")
	runtime.GC()
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	nodes := 0
	for i := range f.Trees {
		nodes += f.Trees[i].NumNodes()
	}
	b.ReportMetric(float64(nodes), "nodes")
	b.ReportMetric(float64(ms.HeapInuse)/float64(len(data)), "heap-bytes/file-byte")
}

// benchMB is the size BenchmarkRead100MB reads.
var benchMB = 100

// cpuTime is the process's user and system CPU time in seconds.
func cpuTime() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}
