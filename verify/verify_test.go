package verify

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// evalRunner scores in process with compile.Eval, standing in for a target
// so that Verify's own logic is tested without a toolchain. err, when set,
// is returned from Score instead.
type evalRunner struct {
	name     string
	layouts  []string
	variants []string
	err      error
}

func (r evalRunner) Name() string       { return r.name }
func (r evalRunner) Layouts() []string  { return r.layouts }
func (r evalRunner) Variants() []string { return r.variants }
func (evalRunner) CompileOptions(string) compile.Options {
	return compile.Options{}
}
func (evalRunner) Tolerance(string, *compile.Program) (bool, float64) { return true, 0 }

func (r evalRunner) Score(_ context.Context, p *compile.Program, _, _ string, rows *forest.Rows, _ string) (*Result, error) {
	if r.err != nil {
		return nil, r.err
	}
	res := &Result{Outputs: make([]float64, rows.Len()*p.NumOutputs), Build: time.Millisecond}
	for i := 0; i < rows.Len(); i++ {
		out := res.Outputs[i*p.NumOutputs : (i+1)*p.NumOutputs]
		compile.Eval(p, rows.Row(i), out)
		if p.IsClassifier() {
			res.Classes = append(res.Classes, evalClassOf(out))
		}
	}
	return res, nil
}

// evalClassOf is the predicted class as the design states it: argmax with ties
// to the lowest index, or for one logistic output, class 1 above 0.5.
func evalClassOf(out []float64) int {
	if len(out) == 1 {
		if out[0] > 0.5 {
			return 1
		}
		return 0
	}
	return forest.Argmax(out)
}

func verifyWine(t *testing.T) *forest.Forest {
	t.Helper()
	f, err := forest.ReadFile(filepath.Join(goldenCases, "sklearn-wine", "model.json"))
	require.NoError(t, err)
	return f
}

func TestVerifyGeneratedRowsAgree(t *testing.T) {
	f := verifyWine(t)
	rep, err := Verify(context.Background(), f, nil, VerifyOptions{
		Runners: []Runner{evalRunner{name: "go", layouts: []string{"nested", "table"}, variants: []string{""}}},
		Targets: []string{"go"},
	})
	require.NoError(t, err)
	require.True(t, rep.OK())
	require.Len(t, rep.Checks, 2)
	for _, c := range rep.Checks {
		require.Equal(t, Agree, c.Status, c.Name())
		require.Equal(t, rep.Rows, c.Matches)
	}
	require.Positive(t, rep.LeafRows)
	require.Positive(t, rep.ThresholdRows)
	require.Equal(t, rep.LeafRows+rep.ThresholdRows, rep.Rows)
	// LeafRows promises a row for every reachable leaf.
	require.Equal(t, rep.Coverage.Leaves, rep.Coverage.LeavesHit)
	require.Equal(t, rep.Coverage.Branches, rep.Coverage.BranchesHit)
	require.Equal(t, 342, rep.Coverage.Leaves, "inspect counts 342 leaves in the wine model, all reachable")
	require.NotEmpty(t, rep.Model)
}

func TestProbeRowsCap(t *testing.T) {
	f := verifyWine(t)
	all1, all2, capped := ProbeRows(f, -1)
	require.False(t, capped)
	for _, limit := range []int{10, 300, 1000} {
		l, th, capped := ProbeRows(f, limit)
		require.True(t, capped)
		require.Equal(t, limit, len(l)+len(th), "limit %d", limit)
		require.LessOrEqual(t, len(l), limit*3/4+1)
		require.Equal(t, all1[0], l[0], "thinning keeps the first row")
		require.Equal(t, all2[0], th[0])
	}
	// Duplicates are dropped: no two rows alike.
	seen := map[string]bool{}
	for _, x := range append(all1, all2...) {
		k := probeKey(x)
		require.False(t, seen[k], "duplicate row %v", x)
		seen[k] = true
	}
}

func TestVerifyGivenRowsCoverage(t *testing.T) {
	f := verifyWine(t)
	rows := &forest.Rows{Features: f.Features, Values: make([]float64, len(f.Features)), Line: []int{2}}
	rep, err := Verify(context.Background(), f, rows, VerifyOptions{
		Runners: []Runner{evalRunner{name: "go", layouts: []string{"nested"}, variants: []string{""}}},
		Targets: []string{"go"},
	})
	require.NoError(t, err)
	require.Equal(t, 1, rep.Rows)
	require.Equal(t, 1, rep.Given)
	require.Zero(t, rep.LeafRows)
	// One row reaches one leaf per tree and takes one direction per split
	// on its path.
	require.Equal(t, len(f.Trees), rep.Coverage.LeavesHit)
	require.Less(t, rep.Coverage.LeafShare(), 0.2)

	rep, err = Verify(context.Background(), f, rows, VerifyOptions{
		Runners: []Runner{evalRunner{name: "go", layouts: []string{"nested"}, variants: []string{""}}},
		Targets: []string{"go"}, Probes: true,
	})
	require.NoError(t, err)
	require.Equal(t, 1+rep.LeafRows+rep.ThresholdRows, rep.Rows)
	require.Equal(t, 1.0, rep.Coverage.LeafShare())
}

// evalFirstDiff finds the first row where p, as a target would compute it,
// disagrees with the interpreter on rows: the row Verify must name.
func evalFirstDiff(f *forest.Forest, p *compile.Program, rows *forest.Rows, exact bool, bound float64, round32 bool) int {
	if round32 { // the reference for a float-input target
		r := *rows
		r.Values = make([]float64, len(rows.Values))
		for i, v := range rows.Values {
			r.Values[i] = float64(float32(v))
		}
		rows = &r
	}
	k := f.NumOutputs()
	want := make([]float64, rows.Len()*k)
	got := make([]float64, rows.Len()*k)
	var wc, gc []int
	for i := 0; i < rows.Len(); i++ {
		f.Predict(rows.Row(i), want[i*k:(i+1)*k])
		compile.Eval(p, rows.Row(i), got[i*k:(i+1)*k])
		if f.IsClassifier() {
			wc = append(wc, f.ClassOf(want[i*k:(i+1)*k]))
			gc = append(gc, evalClassOf(got[i*k:(i+1)*k]))
		}
	}
	return Compare(want, got, wc, gc, k, exact, bound).FirstRow
}

// plantedFault is a planted change to a compiled program.
type plantedFault struct {
	name  string
	plant func(p *compile.Program, node int) bool // false: node does not fit
}

var plantedFaults = []plantedFault{
	{"threshold", func(p *compile.Program, i int) bool {
		n := &p.Trees[0].Nodes[i]
		if n.IsLeaf() {
			return false
		}
		// One step down on the grid the target compares on.
		if p.Compare == compile.Single {
			n.Threshold = float64(math.Nextafter32(float32(n.Threshold), float32(math.Inf(-1))))
		} else {
			n.Threshold = math.Nextafter(n.Threshold, math.Inf(-1))
		}
		p.Midpoints32 = false // the split is no longer a float32's midpoint test
		return true
	}},
	{"leaf", func(p *compile.Program, i int) bool {
		n := &p.Trees[0].Nodes[i]
		if !n.IsLeaf() {
			return false
		}
		n.Value[0] += 0.5
		return true
	}},
}

// plantFirstVisible finds the first node of tree 0 where the plantedFault changes
// some row's result under the given tolerance, and returns it with the
// row Verify must report, or -1.
func plantFirstVisible(t *testing.T, f *forest.Forest, opts compile.Options, fl plantedFault, rows *forest.Rows, exact bool, bound float64, round32 bool) (node, row int) {
	t.Helper()
	base, _, err := compile.Compile(f, opts)
	require.NoError(t, err)
	for i := range base.Trees[0].Nodes {
		p, _, _ := compile.Compile(f, opts)
		if !fl.plant(p, i) {
			continue
		}
		if r := evalFirstDiff(f, p, rows, exact, bound, round32); r >= 0 {
			return i, r
		}
	}
	return -1, -1
}

func verifyProbeRows(f *forest.Forest) *forest.Rows {
	rows, err := verifyRows(f, nil, VerifyOptions{}, &Report{})
	if err != nil {
		panic(err)
	}
	return rows
}

func TestVerifyCatchesPlantedFault(t *testing.T) {
	f := verifyWine(t)
	rows := verifyProbeRows(f)
	for _, fl := range plantedFaults {
		t.Run(fl.name, func(t *testing.T) {
			node, wantRow := plantFirstVisible(t, f, compile.Options{}, fl, rows, true, 0, false)
			require.GreaterOrEqual(t, node, 0, "no node of tree 0 where the plantedFault shows")
			rep, err := Verify(context.Background(), f, nil, VerifyOptions{
				Runners: []Runner{evalRunner{name: "go", layouts: []string{"nested"}, variants: []string{""}}},
				Targets: []string{"go"},
				Tamper:  func(_, _, _ string, p *compile.Program) { fl.plant(p, node) },
			})
			require.NoError(t, err)
			require.False(t, rep.OK())
			c := rep.Checks[0]
			require.Equal(t, Differ, c.Status)
			require.NotNil(t, c.First)
			require.Equal(t, wantRow, c.First.Index)
			require.Less(t, c.Matches, c.Rows)
			require.Len(t, c.First.Values, len(f.Features))
			for j, v := range c.First.Values {
				require.Equal(t, f.Features[j], v.Name)
				w := rows.Row(wantRow)[j]
				require.True(t, float64(v.Value) == w || math.IsNaN(w) && math.IsNaN(float64(v.Value)))
			}
			require.Contains(t, c.First.Origin, "generated")
		})
	}
}

func TestVerifyNotRunAndFailed(t *testing.T) {
	f := verifyWine(t)
	rep, err := Verify(context.Background(), f, nil, VerifyOptions{
		Runners: []Runner{
			evalRunner{name: "go", layouts: []string{"nested"}, variants: []string{""}},
			evalRunner{name: "c", layouts: []string{"nested"}, variants: []string{"double"}, err: fmt.Errorf("no C compiler on PATH (tried cc, gcc, clang): %w", ErrSkip)},
			evalRunner{name: "sqlite", layouts: []string{"nested"}, variants: []string{""}, err: errors.New("near \"CASE\": syntax error")},
		},
		MaxRows: 50,
	})
	require.NoError(t, err)
	byName := map[string]*Check{}
	for _, c := range rep.Checks {
		byName[c.Target] = c
	}
	require.Equal(t, Agree, byName["go"].Status)
	require.Equal(t, NotRun, byName["c"].Status)
	require.Contains(t, byName["c"].Reason, "no C compiler")
	require.Equal(t, Failed, byName["sqlite"].Status)
	require.Contains(t, byName["sqlite"].Reason, "syntax error")
	// duckdb and postgres are asked for through "sql" and no runner serves
	// them: they are named, not left out.
	require.Equal(t, NotRun, byName["duckdb"].Status)
	require.Equal(t, NotRun, byName["postgres"].Status)
	require.False(t, rep.OK(), "a failed build fails the report")
	require.True(t, rep.Capped)
	require.Equal(t, 50, rep.Rows)

	rep, err = Verify(context.Background(), f, nil, VerifyOptions{
		Runners: []Runner{
			evalRunner{name: "go", layouts: []string{"nested"}, variants: []string{""}},
			evalRunner{name: "c", layouts: []string{"nested"}, variants: []string{"double"}, err: fmt.Errorf("no C compiler: %w", ErrSkip)},
		},
		Targets: []string{"go", "c"}, MaxRows: 50,
	})
	require.NoError(t, err)
	require.True(t, rep.OK(), "a target that could not run does not fail the report")
	require.Equal(t, 1, rep.Count(NotRun))
}

func TestVerifySelection(t *testing.T) {
	f := verifyWine(t)
	rs := []Runner{
		evalRunner{name: "c", layouts: []string{"nested", "table"}, variants: []string{"double", "float"}},
		evalRunner{name: "sqlite", layouts: []string{"nested"}, variants: []string{""}},
		evalRunner{name: "duckdb", layouts: []string{"nested"}, variants: []string{""}},
	}
	_, err := Verify(context.Background(), f, nil, VerifyOptions{Runners: rs, Targets: []string{"rust"}})
	require.ErrorContains(t, err, `target "rust" is unknown`)
	_, err = Verify(context.Background(), f, nil, VerifyOptions{Runners: rs, Dialects: []string{"oracle"}})
	require.ErrorContains(t, err, `dialect "oracle" is unknown`)

	rep, err := Verify(context.Background(), f, nil, VerifyOptions{Runners: rs, Targets: []string{"c", "sql"},
		Dialects: []string{"duckdb"}, Layouts: []string{"table"}, Variants: []string{"float", ""}, MaxRows: 20})
	require.NoError(t, err)
	var names []string
	for _, c := range rep.Checks {
		names = append(names, c.Target+":"+c.Variant+":"+c.Layout+":"+string(c.Status))
	}
	// duckdb has no table layout: said so, not dropped.
	require.Equal(t, []string{"c:float:table:agree", "duckdb:::not run"}, names)

	// The portable dialect runs on every engine, the engine's own dialects
	// only where named; a variant no runner of a kind has leaves it alone.
	rs = []Runner{
		evalRunner{name: "go", layouts: []string{"nested"}, variants: []string{""}},
		evalRunner{name: "sqlite", layouts: []string{"nested"}, variants: []string{"", "ansi"}},
		evalRunner{name: "duckdb", layouts: []string{"nested"}, variants: []string{"", "ansi"}},
		evalRunner{name: "postgres", layouts: []string{"nested"}, variants: []string{"", "ansi"}},
	}
	checks := func(o VerifyOptions) []string {
		o.Runners, o.MaxRows = rs, 20
		rep, err := Verify(context.Background(), f, nil, o)
		require.NoError(t, err)
		var names []string
		for _, c := range rep.Checks {
			names = append(names, c.Target+":"+c.Variant+":"+string(c.Status))
		}
		return names
	}
	require.Equal(t, []string{"sqlite:ansi:agree", "duckdb:ansi:agree", "postgres:ansi:agree"},
		checks(VerifyOptions{Targets: []string{"sql"}, Dialects: []string{"ansi"}}))
	require.Equal(t, []string{"go::agree", "postgres::agree"},
		checks(VerifyOptions{Targets: []string{"go", "postgres"}, Dialects: []string{"postgres"}}))
	require.Equal(t, []string{"go::agree", "sqlite::agree", "sqlite:ansi:agree"},
		checks(VerifyOptions{Targets: []string{"go", "sqlite"}, Variants: []string{"float"}}))
}

func TestReportJSON(t *testing.T) {
	f := verifyWine(t)
	rows := verifyProbeRows(f)
	node, _ := plantFirstVisible(t, f, compile.Options{}, plantedFaults[0], rows, true, 0, false)
	rep, err := Verify(context.Background(), f, nil, VerifyOptions{
		Runners: []Runner{evalRunner{name: "go", layouts: []string{"nested"}, variants: []string{""}}},
		Targets: []string{"go"},
		Tamper:  func(_, _, _ string, p *compile.Program) { plantedFaults[0].plant(p, node) },
	})
	require.NoError(t, err)
	b, err := json.Marshal(rep)
	require.NoError(t, err)
	// Missing cells and infinities must encode too.
	nb, err := json.Marshal([]Num{Num(math.NaN()), Num(math.Inf(1)), Num(math.Inf(-1)), -0.5})
	require.NoError(t, err)
	require.Equal(t, `[null,"+Inf","-Inf",-0.5]`, string(nb))
	var back map[string]any
	require.NoError(t, json.Unmarshal(b, &back))
	require.Equal(t, float64(rep.Rows), back["rows"])
	require.True(t, strings.Contains(string(b), `"status":"differ"`))
}

// TestVerifyTargetsCatchPlantedFaults plants a wrong threshold and a wrong
// leaf value into the program each registered target emits, builds it with
// the real toolchain, and expects Verify to name the first row that shows
// it. It uses each runner's first layout and variants to keep CI time down.
func TestVerifyTargetsCatchPlantedFaults(t *testing.T) {
	if len(Runners()) == 0 {
		t.Skip("no target runner is registered in verify.Runners yet")
	}
	f := verifyWine(t)
	rows := verifyProbeRows(f)
	for _, r := range testRunners() {
		for _, variant := range r.Variants() {
			layout := r.Layouts()[0]
			for _, fl := range plantedFaults {
				name := r.Name() + "/" + layout
				if variant != "" {
					name += "-" + variant
				}
				t.Run(name+"/"+fl.name, func(t *testing.T) {
					base, _, err := compile.Compile(f, r.CompileOptions(variant))
					require.NoError(t, err)
					exact, bound := r.Tolerance(variant, base)
					fi, ok := r.(interface{ Float32Inputs(variant string) bool })
					round32 := ok && fi.Float32Inputs(variant)
					node, wantRow := plantFirstVisible(t, f, r.CompileOptions(variant), fl, rows, exact, bound, round32)
					require.GreaterOrEqual(t, node, 0, "no node of tree 0 where the plantedFault shows")
					rep, err := Verify(context.Background(), f, nil, VerifyOptions{
						Runners:  []Runner{r},
						Targets:  []string{r.Name()},
						Layouts:  []string{layout},
						Variants: []string{variant},
						Tamper:   func(_, _, _ string, p *compile.Program) { fl.plant(p, node) },
						TempDir:  t.TempDir(),
					})
					require.NoError(t, err)
					require.Len(t, rep.Checks, 1)
					c := rep.Checks[0]
					if c.Status == NotRun && os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
						t.Fatalf("%s could not run, and SAWMILL_REQUIRE_ENGINES is set: %s", r.Name(), c.Reason)
					}
					if c.Status == NotRun {
						t.Skipf("%s could not run here: %s", r.Name(), c.Reason)
					}
					require.Equal(t, Differ, c.Status, "%s: %s", c.Name(), c.Reason)
					require.Equal(t, wantRow, c.First.Index)
					t.Logf("%s: planted %s fault at tree 0 node %d caught at %s (%d of %d rows agree)",
						c.Name(), fl.name, node, c.First.Origin, c.Matches, c.Rows)
				})
			}
		}
	}
}
