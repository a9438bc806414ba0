package gotarget

import (
	"fmt"
	"math"
	"runtime"
	"slices"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
)

// BenchmarkBinnedWalk measures whether the binned layout (issue 14; the C
// target's emit/ctarget/binned.go) would pay in Go: each row is mapped once
// to small integer bins, one binary search per slot of the extended input
// over the sorted distinct thresholds tested there, and the trees then
// compare bins. Both walks are written here the same way as the emitted
// table layout (nodes in the table's order, lanes trees in lockstep, the
// step computed, not branched on), the float walk on feat, far and thr, the
// binned one on feat, far and a bin index (uint8 when every slot has at most
// 254 distinct thresholds, else uint16); each is checked against the
// interpreter bit for bit, then both are timed interleaved in this thread's
// CPU time, on forests grown on the invented benchmark table
// (bench/train/synth) with and without histogram splits:
//
//	go test ./emit/gotarget -run '^$' -bench BinnedWalk -benchtime 1x
func BenchmarkBinnedWalk(b *testing.B) {
	data, rows := benchTable()
	for _, bins := range []int{255, 0} {
		for _, s := range []struct{ trees, depth int }{{125, 8}, {12, 0}} {
			res, err := train.Train(data, train.Settings{Trees: s.trees, Seed: 1, SkipImportance: true, MaxDepth: s.depth, MaxBins: bins})
			if err != nil {
				b.Fatal(err)
			}
			b.Run(fmt.Sprintf("bins=%d/trees=%d/depth=%d", bins, s.trees, s.depth), func(b *testing.B) {
				benchBinned(b, res.Forest, rows)
			})
		}
	}
}

// walkLanes is the lockstep width of both walks.
const walkLanes = 8

// floatWalk is the table layout's walk.
type floatWalk struct {
	d     *tableData
	feat  []uint32
	far   []uint32
	thr   []float64
	roots []uint32
}

// binWalk is the binned walk: cuts[s] are the sorted distinct thresholds
// tested at slot s of the extended input.
type binWalk[B uint8 | uint16] struct {
	feat  []uint32
	far   []uint32
	bin   []B
	val   []float64 // thr of the table: the value at a leaf
	cuts  [][]float64
	roots []uint32
	nan   B // the bin of NaN, above every index
}

func newFloatWalk(d *tableData) *floatWalk {
	w := &floatWalk{d: d, roots: d.roots}
	for _, n := range d.nodes {
		w.feat = append(w.feat, n.feat)
		w.far = append(w.far, n.far)
		w.thr = append(w.thr, n.thr)
	}
	return w
}

// slotCuts are the sorted distinct thresholds tested at each slot (-0 and
// +0 are one threshold: they compare equal).
func slotCuts(d *tableData) [][]float64 {
	cuts := make([][]float64, d.width+1)
	for _, n := range d.nodes {
		if int(n.feat) != d.width {
			cuts[n.feat] = append(cuts[n.feat], n.thr)
		}
	}
	for s := range cuts {
		slices.Sort(cuts[s])
		cuts[s] = slices.CompactFunc(cuts[s], func(a, b float64) bool { return a == b })
	}
	return cuts
}

func newBinWalk[B uint8 | uint16](d *tableData, cuts [][]float64, nan B) *binWalk[B] {
	w := &binWalk[B]{cuts: cuts, roots: d.roots, nan: nan}
	for _, n := range d.nodes {
		w.feat = append(w.feat, n.feat)
		w.far = append(w.far, n.far)
		w.val = append(w.val, n.thr)
		if int(n.feat) == d.width {
			w.bin = append(w.bin, 0) // a leaf tests the NaN slot: never passes
			continue
		}
		// x <= cuts[k] exactly when bin(x) = #{cuts < x} <= k.
		k, _ := slices.BinarySearch(cuts[n.feat], n.thr)
		w.bin = append(w.bin, B(k))
	}
	return w
}

// bins maps an extended input to bins: #{cuts < v}, found by a branch-free
// binary search, and nan for NaN.
func (w *binWalk[B]) bins(xx []float64, out []B) {
	for s, c := range w.cuts {
		v := xx[s]
		if v != v {
			out[s] = w.nan
			continue
		}
		lo, n := 0, len(c)
		for n > 0 {
			half := n / 2
			if c[lo+half] < v {
				lo += half + 1
				n -= half + 1
			} else {
				n = half
			}
		}
		out[s] = B(lo)
	}
}

func (w *floatWalk) leaves(xx []float64, t []uint32, l *[walkLanes]int) {
	laneLeaves(xx, w.feat, w.far, w.thr, t, l, uint32(w.d.width))
}

func (w *binWalk[B]) leaves(xb []B, t []uint32, l *[walkLanes]int, leaf uint32) {
	laneLeaves(xb, w.feat, w.far, w.bin, t, l, leaf)
}

// laneLeaves walks the trees whose roots are t (the last repeated in the
// unused lanes) in lockstep to their leaves, left into l: a split i goes
// to i+1 when x[feat[i]] <= key[i], else to i+far[i]; feat[i] ==
// leaf marks a leaf. Instantiated once for float64 keys and once per bin
// width, so both walks are the same code.
func laneLeaves[K float64 | uint8 | uint16](x []K, feat, far []uint32, key []K, t []uint32, l *[walkLanes]int, leaf uint32) {
	for k := range l {
		l[k] = int(t[min(k, len(t)-1)])
	}
	for {
		more := false
		for k, i := range l {
			if feat[i] == leaf {
				continue
			}
			more = true
			fail := 1
			if x[feat[i]] <= key[i] {
				fail = 0
			}
			l[k] = i + 1 + (int(far[i])-1)&-fail
		}
		if !more {
			return
		}
	}
}

// extend is the table layout's extended input of one row.
func extend(d *tableData, nf int, x []float64, xx []float64) {
	for j, v := range x {
		xx[j] = v
		if d.variants >= 2 {
			xx[nf+j] = -v
		}
	}
	xx[d.width] = math.NaN()
}

// sumLeaves adds the leaves of every tree in tree order, as Predict does.
func sumLeaves(k int, leaves []float64, l []int, val []float64, acc []float64) {
	for _, i := range l {
		if k == 1 {
			acc[0] += val[i]
			continue
		}
		r := int(val[i]) * k
		for j := range acc {
			acc[j] += leaves[r+j]
		}
	}
}

func benchBinned(b *testing.B, f *forest.Forest, rows []float64) {
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		b.Fatal(err)
	}
	if usesV2(p) || p.Combine != forest.Average {
		b.Fatal("the binned walk benchmark takes format 1 averaged forests")
	}
	d := buildTable(p, nil)
	cuts := slotCuts(d)
	most := 0
	for _, c := range cuts {
		most = max(most, len(c))
	}
	float := floatScorer(p, d)
	var binned func(x []float64, acc []float64)
	var nodeBytes int
	if most < math.MaxUint8 {
		bw := newBinWalk[uint8](d, cuts, math.MaxUint8)
		binned, nodeBytes = binnedScorer(p, d, bw), 9 // feat, far, bin
	} else {
		bw := newBinWalk[uint16](d, cuts, math.MaxUint16)
		binned, nodeBytes = binnedScorer(p, d, bw), 10
	}
	want := f.PredictBatch(rows)
	checkScorer(b, "float", float, rows, want, p)
	checkScorer(b, "binned", binned, rows, want, p)
	nf, got := len(p.Features), make([]float64, p.NumOutputs)
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	var tf, tb []float64
	for range 15 {
		tf = append(tf, timeRows(float, rows, nf, got))
		tb = append(tb, timeRows(binned, rows, nf, got))
	}
	slices.Sort(tf)
	slices.Sort(tb)
	b.Logf("%d trees, %d nodes, at most %d distinct thresholds a slot; load %s", len(p.Trees), p.NumNodes(), most, loadAverage())
	b.Logf("float walk  %6.0f ns/row best, %6.0f median; 16 bytes a node walked (feat and far as uint32, thr)", tf[0], tf[len(tf)/2])
	b.Logf("binned walk %6.0f ns/row best, %6.0f median; %d bytes a node walked; median ratio binned/float %.2f", tb[0], tb[len(tb)/2], nodeBytes, tb[len(tb)/2]/tf[len(tf)/2])
	b.ReportMetric(tf[len(tf)/2], "float-ns/row")
	b.ReportMetric(tb[len(tb)/2], "binned-ns/row")
}

// floatScorer scores one row with the float walk.
func floatScorer(p *compile.Program, d *tableData) func([]float64, []float64) {
	fw := newFloatWalk(d)
	nf, k := len(p.Features), p.NumOutputs
	xx := make([]float64, d.width+1)
	return func(x []float64, acc []float64) {
		extend(d, nf, x, xx)
		clear(acc)
		var l [walkLanes]int
		for t := 0; t < len(d.roots); t += walkLanes {
			rt := d.roots[t:]
			fw.leaves(xx, rt, &l)
			sumLeaves(k, d.leaves, l[:min(walkLanes, len(rt))], fw.thr, acc)
		}
		finish(p, acc)
	}
}

// checkScorer holds every output of score to the interpreter's bits.
func checkScorer(b *testing.B, name string, score func([]float64, []float64), rows, want []float64, p *compile.Program) {
	nf, k := len(p.Features), p.NumOutputs
	got := make([]float64, k)
	for r := range len(rows) / nf {
		score(rows[r*nf:(r+1)*nf], got)
		for j, v := range got {
			if math.Float64bits(v) != math.Float64bits(want[r*k+j]) {
				b.Fatalf("%s walk: row %d output %d: %v, interpreter %v", name, r, j, v, want[r*k+j])
			}
		}
	}
}

// binnedScorer scores one row with the binned walk.
func binnedScorer[B uint8 | uint16](p *compile.Program, d *tableData, bw *binWalk[B]) func([]float64, []float64) {
	nf, k := len(p.Features), p.NumOutputs
	xx := make([]float64, d.width+1)
	xb := make([]B, d.width+1)
	return func(x []float64, acc []float64) {
		extend(d, nf, x, xx)
		bw.bins(xx, xb)
		clear(acc)
		var l [walkLanes]int
		for t := 0; t < len(d.roots); t += walkLanes {
			rt := d.roots[t:]
			bw.leaves(xb, rt, &l, uint32(d.width))
			sumLeaves(k, d.leaves, l[:min(walkLanes, len(rt))], bw.val, acc)
		}
		finish(p, acc)
	}
}

// finish is Predict's end for an averaged forest with no transform.
func finish(p *compile.Program, acc []float64) {
	for j := range acc {
		acc[j] = float64(acc[j]/float64(len(p.Trees))) + p.BaseScore[j]
	}
}

// timeRows is the CPU time per row of one pass of score over rows.
func timeRows(score func([]float64, []float64), rows []float64, nf int, out []float64) float64 {
	start := threadTime()
	n := len(rows) / nf
	for r := range n {
		score(rows[r*nf:(r+1)*nf], out)
	}
	return float64(threadTime()-start) / float64(n)
}
