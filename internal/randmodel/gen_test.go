package randmodel

import (
	"bytes"
	"fmt"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/verify"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"github.com/sawmill-dev/sawmill/forest"
)

func encode(t *testing.T, f *forest.Forest) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := f.Encode(&b); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// TestRandomForestReproducible: a seed names a forest; it is printable as a
// model file that reads back to the same bytes.
func TestRandomForestReproducible(t *testing.T) {
	for seed := uint64(0); seed < 200; seed++ {
		o := GenOptions{Garbage: seed%2 == 0}
		a, b := encode(t, RandomForest(seed, o)), encode(t, RandomForest(seed, o))
		if !bytes.Equal(a, b) {
			t.Fatalf("seed %d: two draws differ", seed)
		}
		back, err := forest.Decode(a, "random.json", forest.ReadOptions{})
		if err != nil {
			t.Fatalf("seed %d: %v\n%s", seed, err, a)
		}
		if c := encode(t, back); !bytes.Equal(a, c) {
			t.Fatalf("seed %d: re-encoding the decoded model changes it", seed)
		}
		ra, rb := RandomRows(seed, back, 20), RandomRows(seed, back, 20)
		if !slices.EqualFunc(ra.Values, rb.Values, func(x, y float64) bool { return math.Float64bits(x) == math.Float64bits(y) }) {
			t.Fatalf("seed %d: two row draws differ", seed)
		}
		if err := CheckRowsRoundTrip(back, ra); err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
	}
	if bytes.Equal(encode(t, RandomForest(1, GenOptions{})), encode(t, RandomForest(2, GenOptions{}))) {
		t.Fatal("seeds 1 and 2 give the same forest")
	}
}

// TestRandomForestCoverage: over a few hundred seeds the generator reaches
// every corner it promises.
func TestRandomForestCoverage(t *testing.T) {
	seen := map[string]bool{}
	outputs := map[int]bool{}
	names := map[string]bool{}
	maxDepth := 0
	for seed := uint64(0); seed < 600; seed++ {
		f := RandomForest(seed, GenOptions{Garbage: true})
		seen["task "+string(f.Task)] = true
		seen["combine "+string(f.Combine)] = true
		seen["transform "+string(f.Transform)] = true
		seen["precision "+string(f.InputPrecision)] = true
		outputs[f.NumOutputs()] = true
		for _, s := range append(slices.Clone(f.Features), f.Classes...) {
			names[s] = true
		}
		for ti := range f.Trees {
			tr := &f.Trees[ti]
			r := reachable(tr)
			if slices.Contains(r, false) {
				seen["unreachable slots"] = true
			}
			if tr.NumNodes() == 1 {
				seen["single leaf"] = true
			}
			for i := range tr.Left {
				if !r[i] || tr.IsLeaf(i) {
					if r[i] {
						for _, v := range tr.Leaf(i, f.NumOutputs()) {
							switch {
							case v == 0 && math.Signbit(v):
								seen["leaf -0"] = true
							case math.Abs(v) >= 1e300:
								seen["leaf huge"] = true
							case v != 0 && math.Abs(v) < 0x1p-1022:
								seen["leaf subnormal"] = true
							}
						}
					}
					continue
				}
				th := tr.Threshold[i]
				switch {
				case th == 0 && math.Signbit(th):
					seen["threshold -0"] = true
				case math.Abs(th) >= 1e300:
					seen["threshold huge"] = true
				case th != 0 && math.Abs(th) < 0x1p-1022:
					seen["threshold subnormal"] = true
				case float64(float32(th)) == th:
					seen["threshold float32"] = true
				default:
					seen["threshold not float32"] = true
				}
				if tr.MissingLeft[i] {
					seen["missing left"] = true
				} else {
					seen["missing right"] = true
				}
			}
			maxDepth = max(maxDepth, depth(tr))
		}
	}
	for _, want := range []string{
		"task classification", "task regression", "combine sum", "combine average", "combine vote",
		"transform none", "transform logistic", "transform softmax", "precision float32", "precision float64",
		"unreachable slots", "single leaf", "leaf -0", "leaf huge", "leaf subnormal",
		"threshold -0", "threshold huge", "threshold subnormal", "threshold float32", "threshold not float32",
		"missing left", "missing right",
	} {
		if !seen[want] {
			t.Errorf("no forest with %s in 600 seeds", want)
		}
	}
	for k := 1; k <= 12; k++ {
		if !outputs[k] {
			t.Errorf("no forest with %d outputs in 600 seeds", k)
		}
	}
	for _, want := range []string{"", "a-b", "a_b", "a b", `'`, `"`, "`", `\`, "/*", "--", "select", "int", "func", "9lives", "温度"} {
		if !names[want] {
			t.Errorf("no forest uses the name %q in 600 seeds", want)
		}
	}
	if maxDepth < 20 {
		t.Errorf("deepest tree in 600 seeds has depth %d, want chains of 20 or more", maxDepth)
	}
}

func depth(t *forest.Tree) int {
	type item struct{ node, d int }
	best := 0
	stack := []item{{0, 0}}
	for len(stack) > 0 {
		it := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		if t.IsLeaf(it.node) {
			best = max(best, it.d)
			continue
		}
		stack = append(stack, item{t.Left[it.node], it.d + 1}, item{t.Right[it.node], it.d + 1})
	}
	return best
}

// TestRandomRowsHitThresholds: rows land exactly on thresholds and on the
// special values, and include missing values and infinities.
func TestRandomRowsHitThresholds(t *testing.T) {
	var on, nan, inf, negZero, sub int
	for seed := uint64(0); seed < 50; seed++ {
		f := RandomForest(seed, GenOptions{})
		rows := RandomRows(seed, f, 50)
		ths := map[float64]bool{}
		for ti := range f.Trees {
			for i, l := range f.Trees[ti].Left {
				if l != -1 {
					ths[f.Trees[ti].Threshold[i]] = true
				}
			}
		}
		for _, v := range rows.Values {
			switch {
			case math.IsNaN(v):
				nan++
			case math.IsInf(v, 0):
				inf++
			case v == 0 && math.Signbit(v):
				negZero++
			case v != 0 && math.Abs(v) < 0x1p-1022:
				sub++
			}
			if ths[v] {
				on++
			}
		}
	}
	for what, n := range map[string]int{"on a threshold": on, "missing": nan, "infinite": inf, "-0": negZero, "subnormal": sub} {
		if n == 0 {
			t.Errorf("no row value %s in 50 seeds", what)
		}
	}
}

// TestShrink: a failure that needs one particular split and one row shrinks
// to a single tree holding that split, and one row.
func TestShrink(t *testing.T) {
	f := RandomForest(7, GenOptions{MaxTrees: 6, MaxDepth: 6, V1Only: true}) // the planting below edits version 1 arrays
	for len(f.Trees) < 3 {
		f.Trees = append(f.Trees, f.Trees[0])
	}
	// Plant a split at the root of tree 1 on a threshold nothing else uses.
	const planted = 12345.678
	tr := &f.Trees[1]
	k := f.NumOutputs()
	tr.Feature = append(tr.Feature, -1, -1)
	tr.Threshold = append(tr.Threshold, 0, 0)
	tr.Left = append(tr.Left, -1, -1)
	tr.Right = append(tr.Right, -1, -1)
	tr.MissingLeft = append(tr.MissingLeft, false, false)
	tr.Value = append(tr.Value, make([]float64, 2*k)...)
	n := tr.NumNodes()
	oldRoot := n - 2
	// Move the old root to slot n-2 and make node 0 a split over it.
	tr.Feature[oldRoot], tr.Threshold[oldRoot] = tr.Feature[0], tr.Threshold[0]
	tr.Left[oldRoot], tr.Right[oldRoot], tr.MissingLeft[oldRoot] = tr.Left[0], tr.Right[0], tr.MissingLeft[0]
	copy(tr.Value[oldRoot*k:(oldRoot+1)*k], tr.Value[:k])
	tr.Feature[0], tr.Threshold[0], tr.Left[0], tr.Right[0] = 0, planted, oldRoot, n-1
	if err := f.Validate("planted"); err != nil {
		t.Fatal(err)
	}
	rows := RandomRows(7, f, 30)
	rows.Values[17*len(f.Features)] = planted
	calls := 0
	fails := func(g *forest.Forest, r *forest.Rows) bool {
		calls++
		for i := 0; i < r.Len(); i++ {
			if r.Row(i)[0] != planted {
				continue
			}
			for ti := range g.Trees {
				gt := &g.Trees[ti]
				for j, l := range gt.Left {
					if l != -1 && gt.Threshold[j] == planted && reachable(gt)[j] {
						return true
					}
				}
			}
		}
		return false
	}
	small, srows := Shrink(f, rows, fails, 500)
	if !fails(small, srows) {
		t.Fatal("the shrunk case no longer fails")
	}
	if srows.Len() != 1 || len(small.Trees) != 1 || small.Trees[0].NumNodes() != 3 {
		t.Fatalf("shrunk to %d rows, %d trees, %d nodes in the first; want 1, 1, 3", srows.Len(), len(small.Trees), small.Trees[0].NumNodes())
	}
	if len(small.Features) != 1 {
		t.Errorf("shrunk model keeps %d features, want the 1 the split tests", len(small.Features))
	}
	if err := small.Validate("shrunk"); err != nil {
		t.Fatal(err)
	}
	t.Logf("%d calls", calls)

	// Written out, it reads back as the same case.
	dir := filepath.Join(t.TempDir(), "diff-seed7")
	if err := WriteCase(dir, small, srows); err != nil {
		t.Fatal(err)
	}
	c, err := goldencase.LoadCase(dir, "diff-seed7")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(encode(t, c.Model), encode(t, small)) || c.Rows.Row(0)[0] != planted {
		t.Fatal("the written case does not read back as written")
	}
	if _, err := os.Stat(filepath.Join(dir, "rows.csv")); err != nil {
		t.Fatal(err)
	}
}

// TestWriteRandomCases writes the differential test's models as case
// folders and loads them back as the harness would. By default they go to a
// temporary folder; SAWMILL_GEN_OUT=dir keeps them there, so a seed can be
// looked at or run by hand (seeds from SAWMILL_DIFF_SEED, count from
// SAWMILL_DIFF_MODELS, as in TestDifferential).
func TestWriteRandomCases(t *testing.T) {
	out := os.Getenv("SAWMILL_GEN_OUT")
	n := EnvInt(t, "SAWMILL_DIFF_MODELS", 4)
	if out == "" {
		out = t.TempDir()
		n = min(n, 4)
	}
	first := EnvInt(t, "SAWMILL_DIFF_SEED", 1)
	for seed := first; seed < first+n; seed++ {
		f := RandomForest(seed, Small)
		rows := RandomRows(seed, f, int(EnvInt(t, "SAWMILL_DIFF_ROWS", 48)))
		name := fmt.Sprintf("diff-seed%d", seed)
		dir := filepath.Join(out, name)
		if err := WriteCase(dir, f, rows); err != nil {
			t.Fatal(err)
		}
		c, err := goldencase.LoadCase(dir, name)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(encode(t, c.Model), encode(t, f)) {
			t.Fatalf("%s: model reads back differently", dir)
		}
		if err := CheckRowsRoundTrip(c.Model, rows); err != nil {
			t.Fatalf("%s: %v", dir, err)
		}
		want, _ := (&goldencase.Case{Model: f, Rows: rows}).Reference()
		got, _ := c.Reference()
		if m := verify.Compare(want, got, nil, nil, f.NumOutputs(), true, 0); !m.OK() {
			t.Fatalf("%s: the written case scores differently: %s", dir, m)
		}
	}
	t.Logf("wrote seeds %d to %d under %s", first, first+n-1, out)
}
