package verify

import (
	"context"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// handForest is a small forest written out for one edge case.
type handForest struct {
	name string
	f    *forest.Forest
}

// leafTree is a tree of one leaf.
func leafTree(v ...float64) forest.Tree {
	return forest.Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1},
		MissingLeft: []bool{false}, Value: v}
}

// stump is one split with two leaves; lv and rv are the leaf vectors.
func stump(feature int, t float64, missingLeft bool, lv, rv []float64) forest.Tree {
	k := len(lv)
	return forest.Tree{
		Feature: []int{feature, -1, -1}, Threshold: []float64{t, 0, 0},
		Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: []bool{missingLeft, false, false},
		Value: append(append(make([]float64, k), lv...), rv...),
	}
}

// chain is a tree of depth d whose node i splits feature i%nf at
// thresholds[i%len] (at i itself when thresholds is nil, so that no split
// is decided by the ones above it); each left child is a leaf of value i,
// the last right child a leaf of value -1. Missing goes left at odd depths.
func chain(d, nf int, thresholds []float64) forest.Tree {
	var t forest.Tree
	for i := 0; i < d; i++ {
		split := len(t.Left)
		t.Feature = append(t.Feature, i%nf, -1)
		th := float64(i)
		if thresholds != nil {
			th = thresholds[i%len(thresholds)]
		}
		t.Threshold = append(t.Threshold, th, 0)
		t.Left = append(t.Left, split+1, -1)
		t.Right = append(t.Right, split+2, -1)
		t.MissingLeft = append(t.MissingLeft, i%2 == 1, false)
		t.Value = append(t.Value, 0, float64(i))
	}
	t.Feature = append(t.Feature, -1)
	t.Threshold = append(t.Threshold, 0)
	t.Left = append(t.Left, -1)
	t.Right = append(t.Right, -1)
	t.MissingLeft = append(t.MissingLeft, false)
	t.Value = append(t.Value, -1)
	return t
}

// randomTree grows a random tree of about n splits over nf features with
// thresholds from ts, k outputs per leaf, random missing sides.
func randomTree(rng *rand.Rand, n, nf, k int, ts []float64) forest.Tree {
	var t forest.Tree
	add := func() int {
		t.Feature = append(t.Feature, -1)
		t.Threshold = append(t.Threshold, 0)
		t.Left = append(t.Left, -1)
		t.Right = append(t.Right, -1)
		t.MissingLeft = append(t.MissingLeft, false)
		for j := 0; j < k; j++ {
			v := rng.NormFloat64()
			switch rng.IntN(12) {
			case 0:
				v = math.Copysign(0, -1)
			case 1:
				v = 0
			case 2:
				v = 5e-324 * float64(rng.IntN(3)-1)
			}
			t.Value = append(t.Value, v)
		}
		return len(t.Left) - 1
	}
	leaves := []int{add()}
	for s := 0; s < n; s++ {
		j := rng.IntN(len(leaves))
		i := leaves[j]
		l, r := add(), add()
		t.Feature[i] = rng.IntN(nf)
		t.Threshold[i] = ts[rng.IntN(len(ts))]
		t.Left[i], t.Right[i] = l, r
		t.MissingLeft[i] = rng.IntN(2) == 0
		leaves[j] = l
		leaves = append(leaves, r)
	}
	return t
}

// edgeThresholds are thresholds around the values where comparisons go
// wrong: zeros, subnormals, float32 neighbours, huge magnitudes.
var edgeThresholds = []float64{0, math.Copysign(0, -1), 5e-324, -5e-324, 2.2250738585072014e-308,
	0.1, -0.1, 0.5, 1, -1, 1.0000001, 0.30000001192092896, 3.4028234663852886e38, 1e300, -1e300, 61.5, 1e-7}

func handForests() []handForest {
	rng := rand.New(rand.NewPCG(1, 2))
	var hs []handForest

	hs = append(hs, handForest{"single-leaf", &forest.Forest{
		Task: forest.Regression, Features: []string{"flow_m3h"}, Combine: forest.Average,
		Transform: forest.NoTransform, BaseScore: []float64{0}, Trees: []forest.Tree{leafTree(-0.0)},
	}})
	hs[0].f.Trees[0].Value[0] = math.Copysign(0, -1)

	var vote []forest.Tree
	for i := 0; i < 7; i++ {
		vote = append(vote, randomTree(rng, 12, 3, 3, edgeThresholds))
	}
	hs = append(hs, handForest{"vote", &forest.Forest{
		Task: forest.Classification, Features: []string{"vibration_rms", "bearing_temp_c", "motor_current_a"},
		Classes: []string{"healthy", "cavitation", "bearing_wear"}, Combine: forest.Vote,
		Transform: forest.NoTransform, BaseScore: []float64{0, 0, 0}, Trees: vote,
	}})

	var boost []forest.Tree
	for i := 0; i < 9; i++ {
		boost = append(boost, randomTree(rng, 10, 4, 1, edgeThresholds))
	}
	boost = append(boost, chain(40, 4, edgeThresholds))
	hs = append(hs, handForest{"sum-base-logistic", &forest.Forest{
		Task: forest.Classification, Features: []string{"a", "b", "c", "d"}, Classes: []string{"healthy", "cavitation"},
		Combine: forest.Sum, Transform: forest.Logistic, BaseScore: []float64{-0.25}, Trees: boost,
	}})

	var soft []forest.Tree
	for i := 0; i < 6; i++ {
		soft = append(soft, randomTree(rng, 15, 5, 4, edgeThresholds))
	}
	hs = append(hs, handForest{"softmax", &forest.Forest{
		Task: forest.Classification, Features: []string{"vibration_rms", "bearing_temp_c", "motor_current_a", "flow_m3h", "suction_pressure_kpa"},
		Classes: []string{"healthy", "cavitation", "bearing_wear", "misalignment"}, Combine: forest.Sum,
		Transform: forest.Softmax, BaseScore: []float64{0.1, math.Copysign(0, -1), -0.2, 0}, Trees: soft,
	}})

	// NaN both ways, rows at thresholds, ±0: stumps on zero thresholds, an
	// average regression with base score.
	hs = append(hs, handForest{"missing-and-zeros", &forest.Forest{
		Task: forest.Regression, Features: []string{"x0", "x1"}, Combine: forest.Average, Transform: forest.NoTransform,
		BaseScore: []float64{0},
		Trees: []forest.Tree{
			stump(0, 0, true, []float64{1}, []float64{2}),
			stump(0, math.Copysign(0, -1), false, []float64{10}, []float64{20}),
			stump(1, 5e-324, true, []float64{math.Copysign(0, -1)}, []float64{0.5}),
			stump(1, -5e-324, false, []float64{0.25}, []float64{math.Copysign(0, -1)}),
			randomTree(rng, 30, 2, 1, edgeThresholds),
		},
	}})

	var f32 []forest.Tree
	for i := 0; i < 5; i++ {
		f32 = append(f32, randomTree(rng, 20, 3, 1, []float64{0.1, 0.30000001, 1.00000001, -2.7182818284590455, 1e-40, 3.4028235e38, 61.5, 0}))
	}
	hs = append(hs, handForest{"float32", &forest.Forest{
		Task: forest.Regression, Features: []string{"p", "q", "r"}, InputPrecision: forest.Float32,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0.5}, Trees: f32,
	}})

	names := []string{"select", "2nd reading", "a-b", "a_b", "back`quote", "end */ comment", "température", "", "x", "\"q\"\n\\", "Predict", "NumFeatures"}
	var hostile []forest.Tree
	for i := 0; i < 4; i++ {
		hostile = append(hostile, randomTree(rng, 25, len(names), 2, edgeThresholds))
	}
	hs = append(hs, handForest{"hostile-names", &forest.Forest{
		Task: forest.Classification, Features: names, Classes: []string{"a */ b", "`c`"}, Combine: forest.Average,
		Transform: forest.NoTransform, BaseScore: []float64{0, 0}, Trees: hostile,
	}})
	for _, h := range hs {
		if h.f.InputPrecision == "" {
			h.f.InputPrecision = forest.Float64
		}
	}
	return hs
}

// edgeRows makes rows that hit every threshold of f exactly and one ulp to
// either side, plus ±0, ±Inf, NaN, subnormals and ordinary values.
func edgeRows(f *forest.Forest, n int, seed uint64) *forest.Rows {
	rng := rand.New(rand.NewPCG(seed, 7))
	var ts []float64
	for _, t := range f.Trees {
		for i, ft := range t.Feature {
			if ft >= 0 {
				th := t.Threshold[i]
				ts = append(ts, th, math.Nextafter(th, math.Inf(1)), math.Nextafter(th, math.Inf(-1)),
					float64(float32(th)), float64(math.Nextafter32(float32(th), float32(math.Inf(1)))))
			}
		}
	}
	special := []float64{0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), math.NaN(), 5e-324, -5e-324, math.MaxFloat64}
	rows := &forest.Rows{Features: f.Features}
	for r := 0; r < n; r++ {
		for range f.Features {
			var v float64
			switch c := rng.IntN(10); {
			case c < 6 && len(ts) > 0:
				v = ts[rng.IntN(len(ts))]
			case c < 8:
				v = special[rng.IntN(len(special))]
			default:
				v = rng.NormFloat64()
			}
			rows.Values = append(rows.Values, v)
		}
		rows.Line = append(rows.Line, r+2)
	}
	return rows
}

func TestGoHandForests(t *testing.T) {
	_, err := goEnv()
	testenv.Need(t, err)
	for _, h := range handForests() {
		t.Run(h.name, func(t *testing.T) {
			if err := h.f.Validate(h.name); err != nil {
				t.Fatal(err)
			}
			p, _, err := compile.Compile(h.f, compile.Options{})
			if err != nil {
				t.Fatal(err)
			}
			rows := edgeRows(h.f, 400, 11)
			for _, layout := range (goRunner{}).Layouts() {
				t.Run(layout, func(t *testing.T) {
					res, err := goRunner{}.Score(context.Background(), p, layout, "", rows, t.TempDir())
					if err != nil {
						t.Fatal(err)
					}
					checkAgainstInterpreter(t, h.f, rows, res)
				})
			}
		})
	}
}

func checkAgainstInterpreter(t *testing.T, f *forest.Forest, rows *forest.Rows, res *Result) {
	t.Helper()
	k := f.NumOutputs()
	if len(res.Outputs) != rows.Len()*k {
		t.Fatalf("%d outputs, want %d", len(res.Outputs), rows.Len()*k)
	}
	want := make([]float64, k)
	for i := 0; i < rows.Len(); i++ {
		f.Predict(rows.Row(i), want)
		for j, w := range want {
			if g := res.Outputs[i*k+j]; math.Float64bits(g) != math.Float64bits(w) {
				t.Fatalf("row %d %v, output %d: got %v (%#x), interpreter %v (%#x)", i, rows.Row(i), j, g, math.Float64bits(g), w, math.Float64bits(w))
			}
		}
		if f.IsClassifier() && res.Classes[i] != f.ClassOf(want) {
			t.Fatalf("row %d: class %d, interpreter %d", i, res.Classes[i], f.ClassOf(want))
		}
	}
}

// TestGoEmittedHeader checks what a reader sees first: the generated-code
// marker (the form go/ast.IsGenerated recognises, from the go command's
// documentation) and the model hash, in every layout.
func TestGoEmittedHeader(t *testing.T) {
	h := handForests()[6] // hostile names
	p, _, err := compile.Compile(h.f, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for _, layout := range (goRunner{}).Layouts() {
		files, err := gotarget.Emit(p, gotarget.Options{Layout: layout})
		if err != nil {
			t.Fatal(err)
		}
		for _, f := range files {
			first, _, _ := strings.Cut(string(f.Data), "\n")
			if !strings.HasPrefix(first, "// Code generated ") || !strings.HasSuffix(first, " DO NOT EDIT.") {
				t.Errorf("%s %s: first line %q is not the generated-code marker", layout, f.Name, first)
			}
		}
		if !strings.Contains(string(files[0].Data), p.Hash) {
			t.Errorf("%s: the model hash is not in the header", layout)
		}
	}
}

// TestGoDeepChain builds a 100,000-deep chain the way auto emits it (the
// table: nested code of that depth is a single function the Go compiler
// builds slowly) and a 3,000-deep one nested, which the nested layout keeps
// flat, and scores both exactly.
func TestGoDeepChain(t *testing.T) {
	_, err := goEnv()
	testenv.Need(t, err)
	for _, c := range []struct {
		depth  int
		layout string
	}{{100_000, emit.Auto}, {3_000, emit.Nested}} {
		f := &forest.Forest{Task: forest.Regression, Features: []string{"a", "b", "c"}, InputPrecision: forest.Float64,
			Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0.5},
			Trees: []forest.Tree{chain(c.depth, 3, nil), randomTree(rand.New(rand.NewPCG(3, 4)), 20, 3, 1, edgeThresholds)}}
		if err := f.Validate("chain"); err != nil {
			t.Fatal(err)
		}
		p, _, err := compile.Compile(f, compile.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if d := p.MaxDepth(); d != c.depth {
			t.Fatalf("compiled chain has depth %d, want %d", d, c.depth)
		}
		rows := edgeRows(f, 200, 5)
		res, err := goRunner{}.Score(context.Background(), p, c.layout, "", rows, t.TempDir())
		if err != nil {
			t.Fatalf("depth %d, %s: %v", c.depth, c.layout, err)
		}
		checkAgainstInterpreter(t, f, rows, res)
		t.Logf("depth %d, %s: build %v", c.depth, c.layout, res.Build.Round(time.Millisecond))
	}
}
