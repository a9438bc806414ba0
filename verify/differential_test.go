package verify

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/internal/randmodel"
)

// Differential testing after Yang, Chen, Eide and Regehr, "Finding and
// Understanding Bugs in C Compilers" (PLDI 2011): random models that nobody
// chose, scored by every target and held against the interpreter.
//
//	SAWMILL_DIFF_MODELS=N   models to run (default diffDefaultModels); .ci/run
//	                        sets a few hundred, a long run takes thousands
//	SAWMILL_DIFF_SEED=S     first seed (default 1); seeds S to S+N-1 run
//	SAWMILL_DIFF_ROWS=R     rows per model (default 48)
//	SAWMILL_DIFF_BATCH=B    models sharing one build (default diffDefaultBatch);
//	                        1 builds and scores every model alone
//	SAWMILL_DIFF_KEEP=dir   where shrunk failing cases go (default ../golden/testdata)
//	SAWMILL_DIFF_SHRINK=D   time spent shrinking one failure (default 3m)
//
// A build costs far more than scoring a small model, so runners that are
// BatchScorers (Go, C) get a batch's models at once: one go test binary of
// one package per model and layout, one C binary per configuration of
// cQuickMatrix. The SQL engines score one model at a time. A
// batch that fails as a whole is scored again model by model, which names
// the model that broke it; a model that fails in a batch must fail alone
// too, and is then shrunk alone. Batches run in parallel (go test
// -parallel, GOMAXPROCS by default). The last log line gives the wall time
// per model, by which CI's model count is sized. A seed names a model for
// one revision of gen.go only; a failure is therefore kept as files
// (golden/testdata/diff-seed<N>), which stay a golden case.
const diffDefaultModels = 16

// diffDefaultBatch is how many models share one build.
const diffDefaultBatch = 64

// scoreTimeout bounds one build and run, so that a hang is a failure.
const scoreTimeout = 3 * time.Minute

// target is one runner, variant and layout.
type target struct {
	r               Runner
	variant, layout string
}

func (tg target) String() string {
	s := tg.r.Name() + "/" + tg.layout
	if tg.variant != "" {
		s += "-" + tg.variant
	}
	return s
}

// lighter returns the target to use for one seed: the Go runner's gofmt,
// vet and emitted-test checks cost more than its build, so they run for
// every fourth seed only.
func (tg target) lighter(seed uint64) target {
	if g, ok := tg.r.(goRunner); ok && lightSeed(seed) {
		g.NoChecks = true
		tg.r = g
	}
	return tg
}

// functionSeed reports whether a seed's model runs through the SQL
// function form too: every eighth. Scored a row per call, the form cost
// 2.8 s a model in MariaDB and 0.9 s in PostgreSQL over the 48 rows
// (measured on 16 seeds: 58 s of the 141 s of target time, DuckDB not
// counted); the golden cases run it in full.
func functionSeed(seed uint64) bool { return seed%8 == 0 }

// errFunctionSeed is the outcome of the function form for other seeds: a
// decline, which is no failure.
var errFunctionSeed = fmt.Errorf("%w: the function form runs for every eighth seed", ErrDeclined)

// lightSeed reports whether a seed's model skips the costlier checks: all
// but every fourth (Job.Light in a batch).
func lightSeed(seed uint64) bool { return seed%4 != 0 }

func allTargets() []target {
	var ts []target
	for _, r := range testRunners() {
		for _, v := range r.Variants() {
			for _, l := range r.Layouts() {
				ts = append(ts, target{r, v, l})
			}
		}
	}
	return ts
}

// outcome is what one target did with one model.
type outcome struct {
	skipped  error // ErrSkip: the toolchain is absent, or (ErrDeclined) the target cannot represent the model
	err      error // compile, emit, build or run failed
	mismatch *Mismatch
	took     time.Duration
	batched  bool // scored in a batch; took is the batch's time per job
}

func (o outcome) failed() bool { return o.err != nil || o.mismatch != nil }

func (o outcome) String() string {
	if o.skipped != nil {
		return "skipped: " + o.skipped.Error()
	}
	if o.err != nil {
		return o.err.Error()
	}
	if o.mismatch != nil {
		return o.mismatch.String()
	}
	return "ok"
}

// runTarget compiles f for the target, scores rows, and compares.
func runTarget(ctx context.Context, tg target, f *forest.Forest, rows *forest.Rows, dir string) outcome {
	ctx, cancel := context.WithTimeout(ctx, scoreTimeout)
	defer cancel()
	start := time.Now()
	p, _, err := compile.Compile(f, tg.r.CompileOptions(tg.variant))
	if err != nil {
		return outcome{err: fmt.Errorf("compile: %v", err)}
	}
	res, err := tg.r.Score(ctx, p, tg.layout, tg.variant, rows, dir)
	if err != nil && !errors.Is(err, ErrSkip) && ctx.Err() != nil {
		err = fmt.Errorf("no result within %v: %v", scoreTimeout, err)
	}
	return judge(tg, f, rows, p, res, err, time.Since(start))
}

// judge turns what Score gave for p, compiled from f, into an outcome: the
// outputs held against the interpreter on rows with the target's
// ReferenceFor, Tolerance and Compare.
func judge(tg target, f *forest.Forest, rows *forest.Rows, p *compile.Program, res *Result, err error, took time.Duration) outcome {
	if errors.Is(err, ErrSkip) {
		return outcome{skipped: err}
	}
	if err != nil {
		return outcome{err: err, took: took}
	}
	c := &goldencase.Case{Model: f, Rows: rows}
	want, wantCls := c.ReferenceFor(tg.r, tg.variant)
	exact, bound := tg.r.Tolerance(tg.variant, p)
	m := Compare(want, res.Outputs, wantCls, res.Classes, f.NumOutputs(), exact, bound)
	o := outcome{took: took}
	if !m.OK() {
		o.mismatch = &m
	}
	return o
}

// checkEval holds compile.Eval against the interpreter bit for bit: with
// Options{} on the rows as given, and with SingleInputs on the rows rounded to
// float32, where the Single form is exact.
func checkEval(f *forest.Forest, rows *forest.Rows) error {
	k := f.NumOutputs()
	want, got := make([]float64, k), make([]float64, k)
	for _, single := range []bool{false, true} {
		p, _, err := compile.Compile(f, compile.Options{SingleInputs: single})
		if err != nil {
			return fmt.Errorf("compile (SingleInputs %v): %v", single, err)
		}
		x := make([]float64, len(f.Features))
		for r := 0; r < rows.Len(); r++ {
			copy(x, rows.Row(r))
			if single {
				for j := range x {
					x[j] = float64(float32(x[j]))
				}
			}
			f.Predict(x, want)
			compile.Eval(p, x, got)
			for j := range want {
				if math.Float64bits(want[j]) != math.Float64bits(got[j]) && !(math.IsNaN(want[j]) && math.IsNaN(got[j])) {
					return fmt.Errorf("compile.Eval (SingleInputs %v), row %d, output %d: %v, interpreter %v", single, r, j, got[j], want[j])
				}
			}
		}
	}
	return nil
}

// diffModel is one random model of a batch.
type diffModel struct {
	seed uint64
	f    *forest.Forest
	rows *forest.Rows
}

// diffStats are the counts TestDifferential reports, over all batches.
type diffStats struct {
	mu       sync.Mutex
	runs     map[string]int   // per target: models that ran
	declined map[string]int   // per target: models it cannot represent
	skips    map[string]error // per target: why its engine is absent
	omitted  map[string]int   // per target: models left out by a count (sparkModels)
	total    time.Duration
}

// sparkUpTo is the first seed the spark runner leaves out: Spark takes
// seconds a statement to plan and compile (about 3 s a model on two idle
// cores), so TestDifferential runs it on the first SAWMILL_DIFF_SPARK_MODELS
// models only (default: all of them).
var sparkUpTo uint64

// errOmitted marks a model a runner left out by such a count.
var errOmitted = errors.New("left out by SAWMILL_DIFF_SPARK_MODELS")

func (st *diffStats) add(tg target, o outcome) {
	st.mu.Lock()
	defer st.mu.Unlock()
	st.total += o.took
	switch {
	case errors.Is(o.skipped, ErrDeclined):
		st.declined[tg.String()]++
	case errors.Is(o.skipped, errOmitted):
		st.omitted[tg.String()]++
	case o.skipped != nil:
		st.skips[tg.String()] = o.skipped
	default:
		st.runs[tg.String()]++
	}
}

// TestDifferential draws random models, runs each through every registered
// target, and holds every output against the interpreter. A failing model is
// shrunk and written as a golden case folder, named in the failure.
func TestDifferential(t *testing.T) {
	n := randmodel.EnvInt(t, "SAWMILL_DIFF_MODELS", diffDefaultModels)
	first := randmodel.EnvInt(t, "SAWMILL_DIFF_SEED", 1)
	nrows := int(randmodel.EnvInt(t, "SAWMILL_DIFF_ROWS", 48))
	batch := max(1, randmodel.EnvInt(t, "SAWMILL_DIFF_BATCH", diffDefaultBatch))
	keep := os.Getenv("SAWMILL_DIFF_KEEP")
	if keep == "" {
		keep = goldenCases
	}
	targets := allTargets()
	if len(targets) == 0 {
		t.Log("no target runners are registered in Runners(): only compile.Eval is held against the interpreter")
	}
	st := &diffStats{runs: map[string]int{}, declined: map[string]int{}, skips: map[string]error{}, omitted: map[string]int{}}
	sparkUpTo = first + randmodel.EnvInt(t, "SAWMILL_DIFF_SPARK_MODELS", n)
	start := time.Now()
	t.Run("models", func(t *testing.T) {
		for lo := first; lo < first+n; lo += batch {
			hi := min(lo+batch, first+n)
			t.Run(fmt.Sprintf("seeds%d-%d", lo, hi-1), func(t *testing.T) {
				t.Parallel()
				diffBatch(t, lo, hi, nrows, batch > 1, targets, keep, st)
			})
		}
	})
	wall := time.Since(start)
	for _, tg := range targets {
		name := tg.String()
		if err, ok := st.skips[name]; ok {
			if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
				t.Errorf("%s: %v, and SAWMILL_REQUIRE_ENGINES is set", tg, err)
			} else {
				t.Logf("%s: skipped: %v", tg, err)
			}
		}
		left := ""
		if n := st.omitted[name]; n > 0 {
			left = fmt.Sprintf(", %d left out (SAWMILL_DIFF_SPARK_MODELS)", n)
		}
		t.Logf("%s: %d models, %d declined as beyond the target%s", tg, st.runs[name], st.declined[name], left)
	}
	t.Logf("seeds %d to %d: %d models, %d rows each, %d targets, batches of %d; wall %v (%v per model), target time %v",
		first, first+n-1, n, nrows, len(targets), batch, wall.Round(time.Millisecond),
		(wall / time.Duration(max(n, 1))).Round(time.Millisecond), st.total.Round(time.Millisecond))
}

// diffBatch runs seeds lo to hi-1 through every target: with one build per
// runner for runners that are BatchScorers (when batched is set), else one
// Score per model and target. Then each seed, as a subtest, logs its
// outcomes and shrinks and keeps its first failure.
func diffBatch(t *testing.T, lo, hi uint64, nrows int, batched bool, targets []target, keep string, st *diffStats) {
	var models []diffModel
	for seed := lo; seed < hi; seed++ {
		f := randmodel.RandomForest(seed, randmodel.Small)
		rows := randmodel.RandomRows(seed, f, nrows)
		if err := randmodel.CheckRowsRoundTrip(f, rows); err != nil {
			t.Errorf("seed %d: %v", seed, err)
			continue
		}
		if err := checkEval(f, rows); err != nil {
			t.Errorf("seed %d: %v", seed, err)
		}
		models = append(models, diffModel{seed, f, rows})
	}
	outs := diffOutcomes(t, models, targets, batched)
	for m, dm := range models {
		t.Run(fmt.Sprintf("seed%d", dm.seed), func(t *testing.T) {
			kept := ""
			for k, tg := range targets {
				tg := tg.lighter(dm.seed)
				o := outs[m][k]
				t.Logf("%s: %s (%v)", tg, o, o.took.Round(time.Millisecond))
				st.add(tg, o)
				if o.skipped != nil || !o.failed() {
					continue // an absent engine fails in TestDifferential, under SAWMILL_REQUIRE_ENGINES
				}
				if o.batched {
					// The model alone must fail too, so that what is shrunk
					// and kept is a failure of the target, not of the batch.
					alone := runTarget(context.Background(), tg, dm.f, dm.rows, t.TempDir())
					if !alone.failed() {
						t.Errorf("seed %d: %s: failed in a batch (%s) but passes alone: %s", dm.seed, tg, o, alone)
						continue
					}
					o = alone
				}
				dir := filepath.Join(keep, fmt.Sprintf("diff-seed%d", dm.seed))
				if kept != "" { // one case per seed: the first failure's
					t.Errorf("seed %d: %s: %s (see %s)", dm.seed, tg, o, kept)
					continue
				}
				kept = dir
				small, srows := shrinkFor(tg, dm.f, dm.rows, o)
				if err := randmodel.WriteCase(dir, small, srows); err != nil {
					t.Errorf("seed %d: %s: %s; writing the shrunk case: %v", dm.seed, tg, o, err)
					continue
				}
				again := runTarget(context.Background(), tg, small, srows, t.TempDir())
				t.Errorf("seed %d: %s: %s\nshrunk to %d trees, %d nodes, %d rows (%s): %s\nagain: SAWMILL_DIFF_SEED=%d SAWMILL_DIFF_MODELS=1 go test ./verify -run Differential",
					dm.seed, tg, o, len(small.Trees), nodeCount(small), srows.Len(), dir, again, dm.seed)
			}
		})
	}
}

// diffOutcomes runs every model through every target: with one
// ScoreBatch per runner for runners that are BatchScorers (when batched is
// set), else one Score per model and target; the runners run at once. A
// batch that fails as a whole is scored again one model at a time, which
// names the model that broke it.
func diffOutcomes(t *testing.T, models []diffModel, targets []target, batched bool) [][]outcome {
	outs := make([][]outcome, len(models)) // per model, per target
	for i := range outs {
		outs[i] = make([]outcome, len(targets))
	}
	single := func(m, k int) {
		if targets[k].variant == functionVariant && !functionSeed(models[m].seed) {
			outs[m][k] = outcome{skipped: errFunctionSeed}
			return
		} else if targets[k].r.Name() == "spark" && models[m].seed >= sparkUpTo {
			outs[m][k] = outcome{skipped: errOmitted}
			return
		}
		outs[m][k] = runTarget(context.Background(), targets[k].lighter(models[m].seed), models[m].f, models[m].rows, t.TempDir())
	}
	var wg sync.WaitGroup
	for _, group := range byRunner(targets) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			bs, ok := targets[group[0]].r.(BatchScorer)
			if !batched || !ok || len(models) == 0 {
				for m := range models {
					for _, k := range group {
						single(m, k)
					}
				}
				return
			}
			if err := scoreBatch(bs, targets, group, models, outs, t.TempDir()); err != nil {
				t.Logf("%s: the batch of seeds %d to %d failed; scoring each model alone: %v",
					bs.Name(), models[0].seed, models[len(models)-1].seed, firstLines(err, 20))
				for m := range models {
					for _, k := range group {
						single(m, k)
					}
				}
			}
		}()
	}
	wg.Wait()
	return outs
}

// byRunner groups target indices by runner, in order.
func byRunner(targets []target) [][]int {
	var groups [][]int
	at := map[string]int{}
	for k, tg := range targets {
		g, ok := at[tg.r.Name()]
		if !ok {
			g = len(groups)
			at[tg.r.Name()] = g
			groups = append(groups, nil)
		}
		groups[g] = append(groups[g], k)
	}
	return groups
}

// scoreBatch scores every model for the targets in group, all one runner's,
// with one ScoreBatch, and fills outs. An error means the batch as a whole
// failed and outs for the group are not set.
func scoreBatch(bs BatchScorer, targets []target, group []int, models []diffModel, outs [][]outcome, dir string) error {
	type slot struct{ m, k int }
	var jobs []Job
	var slots []slot
	var progs []*compile.Program
	for m, dm := range models {
		for _, k := range group {
			tg := targets[k]
			p, _, err := compile.Compile(dm.f, tg.r.CompileOptions(tg.variant))
			if err != nil {
				outs[m][k] = outcome{err: fmt.Errorf("compile: %v", err)}
				continue
			}
			jobs = append(jobs, Job{Program: p, Layout: tg.layout, Variant: tg.variant, Rows: dm.rows, Light: lightSeed(dm.seed)})
			slots = append(slots, slot{m, k})
			progs = append(progs, p)
		}
	}
	if len(jobs) == 0 {
		return nil
	}
	// A batch is many builds' worth of work in one: its time limit grows
	// with it.
	limit := scoreTimeout * time.Duration(1+len(jobs)/32)
	ctx, cancel := context.WithTimeout(context.Background(), limit)
	defer cancel()
	start := time.Now()
	res, err := bs.ScoreBatch(ctx, jobs, dir)
	took := time.Since(start) / time.Duration(len(jobs))
	if errors.Is(err, ErrSkip) {
		for _, s := range slots {
			outs[s.m][s.k] = outcome{skipped: err}
		}
		return nil
	}
	if err != nil {
		if ctx.Err() != nil {
			err = fmt.Errorf("no result within %v: %v", limit, err)
		}
		return err
	}
	if len(res) != len(jobs) {
		return fmt.Errorf("BUG: %s: %d results for %d jobs", bs.Name(), len(res), len(jobs))
	}
	for i, s := range slots {
		o := judge(targets[s.k], models[s.m].f, models[s.m].rows, progs[i], res[i].Result, res[i].Err, took)
		o.batched = true
		outs[s.m][s.k] = o
	}
	return nil
}

// firstLines is err's message cut to n lines.
func firstLines(err error, n int) string {
	lines := strings.SplitN(err.Error(), "\n", n+1)
	if len(lines) > n {
		lines = append(lines[:n], "...")
	}
	return strings.Join(lines, "\n")
}

// shrinkFor shrinks a failing model for one target, keeping the kind of
// failure (an error stays an error, a mismatch a mismatch).
func shrinkFor(tg target, f *forest.Forest, rows *forest.Rows, first outcome) (*forest.Forest, *forest.Rows) {
	dir, err := os.MkdirTemp("", "sawmill-shrink")
	if err != nil {
		return f, rows
	}
	defer os.RemoveAll(dir)
	limit := 3 * time.Minute
	if d, err := time.ParseDuration(os.Getenv("SAWMILL_DIFF_SHRINK")); err == nil {
		limit = d
	}
	deadline := time.Now().Add(limit)
	n := 0
	fails := func(g *forest.Forest, r *forest.Rows) bool {
		if time.Now().After(deadline) {
			return false
		}
		n++
		d := filepath.Join(dir, strconv.Itoa(n))
		if os.Mkdir(d, 0o755) != nil {
			return false
		}
		defer os.RemoveAll(d)
		o := runTarget(context.Background(), tg, g, r, d)
		if first.err != nil {
			return o.err != nil
		}
		return o.mismatch != nil
	}
	return randmodel.Shrink(f, rows, fails, 1000)
}

func nodeCount(f *forest.Forest) int {
	n := 0
	for i := range f.Trees {
		n += f.Trees[i].NumNodes()
	}
	return n
}

// buggyRunner scores with compile.Eval but sends a value equal to a
// threshold the wrong way (x < t for x <= t): a planted bug of the kind
// random models should find.
type buggyRunner struct{}

func (buggyRunner) Name() string                                       { return "buggy" }
func (buggyRunner) Layouts() []string                                  { return []string{"nested"} }
func (buggyRunner) Variants() []string                                 { return []string{""} }
func (buggyRunner) CompileOptions(string) compile.Options              { return compile.Options{} }
func (buggyRunner) Tolerance(string, *compile.Program) (bool, float64) { return true, 0 }

func (buggyRunner) Score(_ context.Context, p *compile.Program, _, _ string, rows *forest.Rows, _ string) (*Result, error) {
	q := *p
	q.Trees = make([]compile.Tree, len(p.Trees))
	for i, t := range p.Trees {
		q.Trees[i] = compile.Tree{Source: t.Source, Nodes: append([]compile.Node(nil), t.Nodes...)}
		for j := range q.Trees[i].Nodes {
			if n := &q.Trees[i].Nodes[j]; !n.IsLeaf() && n.Op == compile.LE {
				n.Op = compile.LT
			}
		}
	}
	res := &Result{Outputs: make([]float64, rows.Len()*p.NumOutputs)}
	for r := 0; r < rows.Len(); r++ {
		out := res.Outputs[r*p.NumOutputs : (r+1)*p.NumOutputs]
		compile.Eval(&q, rows.Row(r), out)
		if p.IsClassifier() {
			f := forest.Forest{Task: p.Task}
			res.Classes = append(res.Classes, f.ClassOf(out))
		}
	}
	return res, nil
}

// TestDifferentialFindsPlantedBug: the differential machinery finds a
// planted bug in a few seeds, shrinks it to one tree and one row, and keeps
// a case folder that loads and still fails.
func TestDifferentialFindsPlantedBug(t *testing.T) {
	tg := target{r: buggyRunner{}, layout: "nested"}
	for seed := uint64(1); seed <= 50; seed++ {
		f := randmodel.RandomForest(seed, randmodel.Small)
		rows := randmodel.RandomRows(seed, f, 48)
		o := runTarget(context.Background(), tg, f, rows, "")
		if !o.failed() {
			continue
		}
		small, srows := shrinkFor(tg, f, rows, o)
		dir := filepath.Join(t.TempDir(), fmt.Sprintf("diff-seed%d", seed))
		if err := randmodel.WriteCase(dir, small, srows); err != nil {
			t.Fatal(err)
		}
		c, err := goldencase.LoadCase(dir, "diff-seed")
		if err != nil {
			t.Fatal(err)
		}
		again := runTarget(context.Background(), tg, c.Model, c.Rows, "")
		if again.mismatch == nil {
			t.Fatalf("seed %d: the kept case passes: %s", seed, again)
		}
		if len(c.Model.Trees) != 1 || c.Rows.Len() != 1 || nodeCount(c.Model) > 3 {
			t.Errorf("seed %d: shrunk to %d trees, %d nodes, %d rows; want 1 tree of at most 3 nodes and 1 row",
				seed, len(c.Model.Trees), nodeCount(c.Model), c.Rows.Len())
		}
		t.Logf("seed %d: %s; shrunk to %d nodes, %d rows", seed, o, nodeCount(c.Model), c.Rows.Len())
		return
	}
	t.Fatal("50 random models did not find a planted <= versus < bug")
}

// brittleRunner scores with compile.Eval, exactly, except that a program of
// three trees "does not build": Score fails for it, and ScoreBatch fails as
// a whole for any batch holding one, as a build does.
type brittleRunner struct{}

func (brittleRunner) Name() string                                       { return "brittle" }
func (brittleRunner) Layouts() []string                                  { return []string{"nested"} }
func (brittleRunner) Variants() []string                                 { return []string{""} }
func (brittleRunner) CompileOptions(string) compile.Options              { return compile.Options{} }
func (brittleRunner) Tolerance(string, *compile.Program) (bool, float64) { return true, 0 }

func (brittleRunner) Score(_ context.Context, p *compile.Program, _, _ string, rows *forest.Rows, _ string) (*Result, error) {
	if len(p.Trees) == 3 {
		return nil, errors.New("three trees do not build")
	}
	res := &Result{Outputs: make([]float64, rows.Len()*p.NumOutputs)}
	for r := 0; r < rows.Len(); r++ {
		out := res.Outputs[r*p.NumOutputs : (r+1)*p.NumOutputs]
		compile.Eval(p, rows.Row(r), out)
		if p.IsClassifier() {
			f := forest.Forest{Task: p.Task}
			res.Classes = append(res.Classes, f.ClassOf(out))
		}
	}
	return res, nil
}

func (r brittleRunner) ScoreBatch(ctx context.Context, jobs []Job, dir string) ([]BatchResult, error) {
	res := make([]BatchResult, len(jobs))
	for i, j := range jobs {
		if len(j.Program.Trees) == 3 {
			return nil, fmt.Errorf("the batch does not build (job %d)", i)
		}
		res[i].Result, res[i].Err = r.Score(ctx, j.Program, j.Layout, j.Variant, j.Rows, dir)
	}
	return res, nil
}

// TestDifferentialBatchFallback: a batch that fails to build is scored
// again model by model, so only the model that broke it fails, and not as
// a batch; a batch without such a model is scored as one.
func TestDifferentialBatchFallback(t *testing.T) {
	targets := []target{{r: brittleRunner{}, layout: "nested"}}
	var models []diffModel
	for seed := uint64(1); seed <= 16; seed++ {
		f := randmodel.RandomForest(seed, randmodel.Small)
		models = append(models, diffModel{seed, f, randmodel.RandomRows(seed, f, 16)})
	}
	var broken, clean []diffModel
	for _, m := range models {
		p, _, err := compile.Compile(m.f, compile.Options{})
		if err != nil {
			t.Fatal(err)
		}
		if len(p.Trees) == 3 {
			broken = append(broken, m)
		} else {
			clean = append(clean, m)
		}
	}
	if len(broken) == 0 || len(clean) == 0 {
		t.Fatalf("seeds 1 to 16: %d models of three trees, %d others; want some of each", len(broken), len(clean))
	}
	outs := diffOutcomes(t, models, targets, true)
	for m, dm := range models {
		o := outs[m][0]
		p, _, _ := compile.Compile(dm.f, compile.Options{})
		if want := len(p.Trees) == 3; o.failed() != want || o.batched {
			t.Errorf("seed %d (%d trees): %s, batched %v; want failed %v, not batched", dm.seed, len(p.Trees), o, o.batched, want)
		}
	}
	outs = diffOutcomes(t, clean, targets, true)
	for m, dm := range clean {
		if o := outs[m][0]; o.failed() || !o.batched {
			t.Errorf("seed %d: %s, batched %v; want ok in the batch", dm.seed, o, o.batched)
		}
	}
}
