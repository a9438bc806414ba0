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

// lgbBigModel writes a LightGBM text model of trees trees of leaves leaves
// each (random shapes: every leaf split in turn), 20 features, thresholds
// and leaf values of 17 digits, as save_model writes them.
func lgbBigModel(trees, leaves int) []byte {
	rng := rand.New(rand.NewPCG(3, 3))
	var b bytes.Buffer
	b.WriteString("tree\nversion=v4\nnum_class=1\nnum_tree_per_iteration=1\nlabel_index=0\nmax_feature_idx=19\nobjective=binary sigmoid:1\nfeature_names=")
	for i := range 20 {
		if i > 0 {
			b.WriteByte(' ')
		}
		fmt.Fprintf(&b, "Column_%d", i)
	}
	b.WriteString("\n\n")
	line := func(key string, n int, val func(i int) string) {
		b.WriteString(key + "=")
		for i := range n {
			if i > 0 {
				b.WriteByte(' ')
			}
			b.WriteString(val(i))
		}
		b.WriteByte('\n')
	}
	for t := range trees {
		S := leaves - 1
		// Split leaf j of the tree grown so far into leaf j and a new leaf:
		// split node s takes leaf j's place under its parent.
		left, right := make([]int, S), make([]int, S)
		parent := []int{-1} // of each leaf: the split node and side (2p or 2p+1), -1 for the root
		for s := range S {
			j := rng.IntN(len(parent))
			p := parent[j]
			if p >= 0 {
				if p%2 == 0 {
					left[p/2] = s
				} else {
					right[p/2] = s
				}
			}
			left[s], right[s] = ^j, ^len(parent)
			parent[j] = 2 * s
			parent = append(parent, 2*s+1)
		}
		fmt.Fprintf(&b, "Tree=%d\nnum_leaves=%d\nnum_cat=0\n", t, leaves)
		line("split_feature", S, func(int) string { return strconv.Itoa(rng.IntN(20)) })
		line("threshold", S, func(int) string { return strconv.FormatFloat(rng.NormFloat64(), 'g', 17, 64) })
		line("decision_type", S, func(int) string { return []string{"2", "8", "10", "4"}[rng.IntN(4)] })
		line("left_child", S, func(i int) string { return strconv.Itoa(left[i]) })
		line("right_child", S, func(i int) string { return strconv.Itoa(right[i]) })
		line("leaf_value", leaves, func(int) string { return strconv.FormatFloat(rng.NormFloat64()/10, 'g', 17, 64) })
		b.WriteString("is_linear=0\nshrinkage=0.1\n\n\n")
	}
	b.WriteString("end of trees\n\npandas_categorical:null\n")
	return b.Bytes()
}

// BenchmarkLightGBMImport reads a 1,000-tree LightGBM model of 499,000
// nodes (250 leaves a tree) and reports the heap in use after the read and
// the bytes allocated per read:
//
//	go test ./source -run '^$' -bench LightGBMImport -benchtime 5x
func BenchmarkLightGBMImport(b *testing.B) {
	data := lgbBigModel(1000, 250)
	benchmarkImport(b, data, "big.txt")
}

// benchmarkImport reads data as a model file b.N times and reports the
// nodes read, the bytes allocated per read, the heap in use after the read,
// the file's size, and the CPU time per read (user and system over every
// thread, the garbage collector's included: on a shared machine it says
// what a read costs when wall time does not).
func benchmarkImport(b *testing.B, data []byte, name string) {
	b.SetBytes(int64(len(data)))
	runtime.GC()
	var m0 runtime.MemStats
	runtime.ReadMemStats(&m0)
	b.ResetTimer()
	cpu0 := cpuTime()
	var r *Result
	for range b.N {
		var err error
		r, err = Decode(data, name, "", Options{})
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

// cpuTime is the CPU time (user and system) the process has used.
func cpuTime() time.Duration {
	var u syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &u); err != nil {
		return 0
	}
	return time.Duration(u.Utime.Nano() + u.Stime.Nano())
}
