package verify

import (
	"context"
	"fmt"
	"math"
	"os"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/randmodel"
)

// deepDepth is the depth of the deep-tree limit test, the depth the project
// promises to take everywhere.
const deepDepth = 100_000

// deepForest is a regression model of one chain n splits deep in which
// every node matters, so no pass can shorten it.
func deepForest(n int) *forest.Forest {
	m := 2*n + 1
	t := forest.Tree{Feature: make([]int, m), Threshold: make([]float64, m), Left: make([]int, m),
		Right: make([]int, m), MissingLeft: make([]bool, m), Value: make([]float64, m)}
	// Node 2i splits on x <= i: its leaf hangs left and the chain goes on
	// right past ever larger thresholds, so no split is decided by its
	// ancestors; missing values go left at every other node.
	for i := 0; i < n; i++ {
		t.Feature[2*i], t.Threshold[2*i] = 0, float64(i)
		t.Left[2*i], t.Right[2*i] = 2*i+1, 2*i+2
		t.MissingLeft[2*i] = i%2 == 1
		t.Feature[2*i+1], t.Left[2*i+1], t.Right[2*i+1], t.Value[2*i+1] = -1, -1, -1, float64(i)+0.25
	}
	t.Feature[2*n], t.Left[2*n], t.Right[2*n], t.Value[2*n] = -1, -1, -1, -1
	f := &forest.Forest{Task: forest.Regression, Features: []string{"x"}, InputPrecision: forest.Float64,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0}, Trees: []forest.Tree{t}}
	if err := f.Validate("deep"); err != nil {
		panic("BUG: " + err.Error())
	}
	return f
}

func deepRows(n int) *forest.Rows {
	vals := []float64{-1, 0, 0.5, float64(n/2) + 0.5, float64(n - 1), float64(n) - 0.5, float64(n), 1e300, math.Inf(1), math.NaN()}
	rows := &forest.Rows{Features: []string{"x"}, Values: vals}
	for i := range vals {
		rows.Line = append(rows.Line, i+2)
	}
	return rows
}

// TestDeepTree: a tree 100,000 deep goes through encode, read, compile and
// the Program's evaluation without recursion, bit-exact with the
// interpreter. With SAWMILL_LIMIT_TARGETS=1 every target, variant and layout
// (auto included) builds and scores it too; each that cannot take it is
// reported by name.
func TestDeepTree(t *testing.T) {
	f := deepForest(deepDepth)
	path := t.TempDir() + "/deep.json"
	if err := forest.WriteFile(path, f); err != nil {
		t.Fatal(err)
	}
	g, err := forest.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	rows := deepRows(deepDepth)
	for _, single := range []bool{false, true} {
		p, _, err := compile.Compile(g, compile.Options{SingleInputs: single})
		if err != nil {
			t.Fatalf("compile (SingleInputs %v): %v", single, err)
		}
		if d := p.MaxDepth(); d != deepDepth {
			t.Fatalf("compiled depth %d, want %d: a pass shortened a chain where every split matters", d, deepDepth)
		}
	}
	if err := checkEval(g, rows); err != nil {
		t.Fatal(err)
	}
	limitTargets(t, "a tree 100,000 deep", g, rows)
}

// limitTargets runs a model at one of the limits through every target,
// variant and layout, auto included, when SAWMILL_LIMIT_TARGETS is set,
// and logs each that cannot take it.
func limitTargets(t *testing.T, what string, f *forest.Forest, rows *forest.Rows) {
	if os.Getenv("SAWMILL_LIMIT_TARGETS") == "" {
		t.Logf("set SAWMILL_LIMIT_TARGETS=1 to build and score %s with every target (minutes)", what)
		return
	}
	var cannot []string
	for _, tg := range allTargets() {
		if !slices.Contains(tg.r.Layouts(), emit.Auto) && tg.layout == tg.r.Layouts()[0] {
			auto := tg
			auto.layout = emit.Auto
			if o := limitOne(t, what, auto, f, rows); o != "" {
				cannot = append(cannot, o)
			}
		}
		if o := limitOne(t, what, tg, f, rows); o != "" {
			cannot = append(cannot, o)
		}
	}
	for _, c := range cannot {
		t.Logf("cannot take %s: %s", what, c)
	}
}

// limitOne scores a model with one target and returns "" on success, else
// the target and what went wrong. A failure of auto fails the test: it must
// pick a layout the toolchain can build.
func limitOne(t *testing.T, what string, tg target, f *forest.Forest, rows *forest.Rows) string {
	start := time.Now()
	o := runTarget(context.Background(), tg, f, rows, t.TempDir())
	took := time.Since(start).Round(time.Millisecond)
	switch {
	case o.skipped != nil:
		t.Logf("%s: skipped: %v", tg, o.skipped)
		return ""
	case !o.failed():
		t.Logf("%s: ok in %v", tg, took)
		return ""
	}
	msg := o.String()
	if len(msg) > 400 {
		msg = msg[:400] + "…"
	}
	if tg.layout == emit.Auto {
		t.Errorf("%s: layout auto cannot take %s (%v): %s", tg, what, took, msg)
	}
	return fmt.Sprintf("%s (%v): %s", tg, took, msg)
}

// TestWideModel: a classifier of 10,000 classes compiles and evaluates
// exactly, and (SAWMILL_LIMIT_TARGETS) runs through every target.
func TestWideModel(t *testing.T) {
	const k = 10_000
	f := &forest.Forest{Task: forest.Classification, Features: []string{"x", "y"}, InputPrecision: forest.Float64,
		Combine: forest.Average, Transform: forest.Softmax, BaseScore: make([]float64, k)}
	for j := 0; j < k; j++ {
		f.Classes = append(f.Classes, fmt.Sprintf("class %d", j))
	}
	for ti := 0; ti < 3; ti++ {
		v := make([]float64, 7*k)
		for i := range v {
			v[i] = float64((i*7+ti)%13) / 8
		}
		f.Trees = append(f.Trees, forest.Tree{Feature: []int{0, 1, -1, -1, 1, -1, -1}, Threshold: []float64{0.5, float64(ti), 0, 0, -1, 0, 0},
			Left: []int{1, 2, -1, -1, 5, -1, -1}, Right: []int{4, 3, -1, -1, 6, -1, -1}, MissingLeft: []bool{ti == 1, true, false, false, false, false, false}, Value: v})
	}
	if err := f.Validate("wide"); err != nil {
		t.Fatal(err)
	}
	rows := randmodel.RandomRows(5, f, 12)
	if err := checkEval(f, rows); err != nil {
		t.Fatal(err)
	}
	limitTargets(t, "10,000 outputs", f, rows)
}

// TestLongName: a feature name and a class label of 1 MB compile and
// evaluate exactly, and (SAWMILL_LIMIT_TARGETS) run through every target.
func TestLongName(t *testing.T) {
	long := strings.Repeat("x", 1<<20)
	f := randmodel.RandomForest(11, randmodel.GenOptions{PlainNames: true, MaxFeatures: 3, MaxTrees: 3, NoHuge: true})
	f.Features[0] = long
	if f.IsClassifier() {
		f.Classes[0] = long
	}
	if err := f.Validate("long"); err != nil {
		t.Fatal(err)
	}
	rows := randmodel.RandomRows(11, f, 12)
	if err := checkEval(f, rows); err != nil {
		t.Fatal(err)
	}
	if err := randmodel.CheckRowsRoundTrip(f, rows); err != nil {
		t.Fatal(err)
	}
	limitTargets(t, "a name of 1 MB", f, rows)
}
