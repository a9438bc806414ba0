package verify

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/emit/targets"
	"github.com/sawmill-dev/sawmill/forest"
)

// DefaultMaxRows caps the rows Verify generates when none are given.
const DefaultMaxRows = 20000

// A target with Engines (SQL) stands for every runner it lists; the engines'
// variants are dialects, chosen with VerifyOptions.Dialects.

// VerifyOptions selects what Verify checks. Empty lists mean "all".
type VerifyOptions struct {
	// Targets are target names (targets.Names: "go", "c", "sql", which
	// stands for every SQL engine) or runner names ("sqlite", "duckdb",
	// "postgres").
	Targets []string
	// Layouts limits the layouts to these (each runner's Layouts()
	// otherwise); a layout a runner does not have is left out for it.
	Layouts []string
	// Variants limits the variants ("double", "float" for C) of the runners
	// that have any of them; other runners run all of theirs.
	Variants []string
	// Dialects limits the SQL dialects: an engine's name for its own
	// dialect (variant "" of its runner), AnsiDialect for the portable one
	// (run on every selected engine). Engines are chosen with Targets.
	Dialects []string
	// PostgresDSN is the server the postgres runner talks to; "" leaves it
	// to the runner (Config.PostgresDSN, else PostgresDSN()).
	PostgresDSN string
	// MySQLDSN is the MySQL or MariaDB server of the mysql runner; ""
	// leaves it to the runner (Config.MySQLDSN, else $SAWMILL_MYSQL_DSN).
	MySQLDSN string
	// SparkPython is the Python (with pyspark) the spark runner starts; ""
	// leaves it to the runner (Config.SparkPython, else SparkPython()).
	SparkPython string
	// MaxNest is the CASE nesting the SQL runners' statements may use
	// (sql.Options.MaxNest); 0 leaves each dialect's default.
	MaxNest int
	// MaxRows caps the generated rows: 0 means DefaultMaxRows, < 0 no cap.
	// Given rows are never capped.
	MaxRows int
	// Probes adds generated rows to given rows.
	Probes bool
	// Runners replaces Runners(); nil means Runners().
	Runners []Runner
	// TempDir is where the build folders go ("" = the system's).
	TempDir string
	// Done, when set, is called after each check.
	Done func(c *Check)
	// Expected, when set, holds outputs the library that trained the model
	// recorded for the given rows, NumOutputs per row back to back, in row
	// order. The interpreter (Report.Expected) and every check
	// (Check.Expected) are held against them within ExpectedTolerance, plus
	// the check's own bound where it is not bit-exact. ExpectedSource names
	// them in reports.
	Expected          []float64
	ExpectedTolerance float64
	ExpectedSource    string
	// Tamper, when set, edits each program after compilation and before it
	// is emitted, so tests can plant a fault in emitted code and see that
	// Verify catches it. The reference stays the untouched model.
	Tamper func(target, layout, variant string, p *compile.Program)
}

// Status is the outcome of one check.
type Status string

const (
	Agree  Status = "agree"   // every row matched
	Differ Status = "differ"  // some row did not
	NotRun Status = "not run" // the toolchain or engine is not here
	Failed Status = "failed"  // emitting, building or running failed
)

// Report is what Verify found.
type Report struct {
	Model    string   `json:"model"` // model hash
	Features []string `json:"features"`
	Classes  []string `json:"classes,omitempty"`
	// Rows is the number of rows every check scored; Given of them came
	// from the caller, LeafRows and ThresholdRows were generated.
	Rows          int      `json:"rows"`
	Given         int      `json:"given_rows"`
	LeafRows      int      `json:"leaf_rows"`
	ThresholdRows int      `json:"threshold_rows"`
	Capped        bool     `json:"capped"` // generated rows were cut to MaxRows
	Coverage      Coverage `json:"coverage"`
	// Expected is the interpreter against VerifyOptions.Expected.
	Expected *Agreement `json:"expected,omitempty"`
	Checks   []*Check   `json:"checks"`
}

// Coverage is compile.Cover's measure of the rows.
type Coverage struct {
	Leaves      int `json:"leaves"`
	LeavesHit   int `json:"leaves_hit"`
	Branches    int `json:"branches"`
	BranchesHit int `json:"branches_hit"`
}

// LeafShare and BranchShare are the shares exercised, 1 when there is
// nothing to exercise.
func (c Coverage) LeafShare() float64   { return ratio(c.LeavesHit, c.Leaves) }
func (c Coverage) BranchShare() float64 { return ratio(c.BranchesHit, c.Branches) }

func ratio(a, b int) float64 {
	if b == 0 {
		return 1
	}
	return float64(a) / float64(b)
}

// Check is one target, variant and layout.
type Check struct {
	Target  string `json:"target"`
	Variant string `json:"variant,omitempty"`
	Layout  string `json:"layout"`
	Status  Status `json:"status"`
	// Reason says why a check was not run or failed.
	Reason string `json:"reason,omitempty"`
	// Exact is whether outputs must be bit-identical; otherwise Bound is
	// the largest absolute difference allowed.
	Exact bool `json:"exact"`
	// Float32Inputs says the target takes float32 inputs (C's float
	// variant), so the reference is the model on the rows rounded to
	// float32, all the target receives.
	Float32Inputs   bool `json:"float32_inputs,omitempty"`
	Bound           Num  `json:"bound,omitempty"`
	Rows            int  `json:"rows"`
	Matches         int  `json:"matches"` // rows whose outputs and class agree
	LabelMismatches int  `json:"label_mismatches"`
	// OpenLabels counts the rows where a lossy build's label may differ:
	// the reference's top two outputs are within twice the bound.
	OpenLabels int    `json:"open_labels,omitempty"`
	MaxAbsDiff Num    `json:"max_abs_diff"`
	First      *Row   `json:"first_mismatch,omitempty"`
	Build      Millis `json:"build_ms"`
	Run        Millis `json:"run_ms"`
	// Toolchain names the compilers and their versions that built the
	// target (the C runner's builds), when the runner says.
	Toolchain string `json:"toolchain,omitempty"`
	// Expected is the target against VerifyOptions.Expected.
	Expected *Agreement `json:"expected,omitempty"`
}

// Name is "target", "target/variant" and the layout: "c/float table".
func (c *Check) Name() string {
	n := c.Target
	if c.Variant != "" {
		n += "/" + c.Variant
	}
	if c.Layout != "" {
		n += " " + c.Layout
	}
	return n
}

// Row is a mismatching row shown in full.
type Row struct {
	Index int `json:"index"` // 0-based among the rows checked
	// Line is the row's line in the given file; 0 for a generated row.
	Line   int          `json:"line,omitempty"`
	Origin string       `json:"origin"` // "ROWS.csv:12", "generated leaf row 3", ...
	Values []NamedValue `json:"values"`
	Want   []Num        `json:"want"`
	Got    []Num        `json:"got"`
	// Output is the first output that differs, -1 when only the class does.
	Output    int    `json:"output"`
	WantClass string `json:"want_class,omitempty"`
	GotClass  string `json:"got_class,omitempty"`
}

// NamedValue is one feature value of a row (NaN when missing).
type NamedValue struct {
	Name  string `json:"name"`
	Value Num    `json:"value"`
}

// Num is a float64 that encodes in JSON as a number, null for NaN
// (missing) and the strings "+Inf" and "-Inf".
type Num float64

func (n Num) MarshalJSON() ([]byte, error) {
	v := float64(n)
	switch {
	case math.IsNaN(v):
		return []byte("null"), nil
	case math.IsInf(v, 1):
		return []byte(`"+Inf"`), nil
	case math.IsInf(v, -1):
		return []byte(`"-Inf"`), nil
	}
	return strconv.AppendFloat(nil, v, 'g', -1, 64), nil
}

// Millis is a duration that encodes in JSON as milliseconds.
type Millis time.Duration

func (m Millis) MarshalJSON() ([]byte, error) {
	return strconv.AppendFloat(nil, float64(time.Duration(m).Microseconds())/1000, 'f', -1, 64), nil
}

// OK reports whether every check that ran agreed, with the recorded
// outputs too when there are any.
func (r *Report) OK() bool {
	if !r.Expected.OK() {
		return false
	}
	for _, c := range r.Checks {
		if c.Status == Differ || c.Status == Failed || !c.Expected.OK() {
			return false
		}
	}
	return true
}

// Count returns how many checks have status s.
func (r *Report) Count(s Status) int {
	n := 0
	for _, c := range r.Checks {
		if c.Status == s {
			n++
		}
	}
	return n
}

// Verify emits f for every selected target, variant and layout, builds it
// with the real toolchain or loads it into the engine, scores every row and
// holds each output against the interpreter (Compare, with the runner's
// Tolerance). Without rows it generates them: a row reaching every
// reachable leaf (compile.LeafRows), then rows at every threshold and its
// float64 and float32 neighbours and missing (compile.ThresholdRows),
// duplicates dropped, cut to MaxRows by even spacing so every tree keeps a
// share. A target whose toolchain is absent is reported NotRun with the
// runner's reason and does not stop the others. The error is for the
// options themselves (an unknown target, say); what the targets did is in
// the report.
func Verify(ctx context.Context, f *forest.Forest, rows *forest.Rows, o VerifyOptions) (*Report, error) {
	runners := o.Runners
	if runners == nil {
		runners = Runners()
	}
	sel, missing, err := selectRunners(runners, o)
	if err != nil {
		return nil, err
	}
	rep := &Report{Features: f.Features, Classes: f.Classes}
	rows, err = verifyRows(f, rows, o, rep)
	if err != nil {
		return nil, err
	}
	rep.Rows = rows.Len()
	x := make([][]float64, rows.Len())
	for i := range x {
		x[i] = rows.Row(i)
	}
	c := compile.Cover(f, x)
	rep.Coverage = Coverage{c.Leaves, c.LeavesHit, c.Branches, c.BranchesHit}

	refs := map[bool]*reference{}
	refFor := func(round32 bool) *reference {
		if refs[round32] == nil {
			refs[round32] = newReference(f, x, round32)
		}
		return refs[round32]
	}
	if o.Expected != nil {
		k := f.NumOutputs()
		if len(o.Expected) != rep.Given*k {
			return nil, fmt.Errorf("%d expected outputs for %d given rows of %d outputs", len(o.Expected), rep.Given, k)
		}
		rep.Expected = agree(f, rows, o.ExpectedSource, o.Expected, refFor(false).outputs, k, o.ExpectedTolerance)
	}

	for _, name := range missing {
		ch := &Check{Target: name, Status: NotRun, Reason: "no " + name + " runner in this build of sawmill"}
		rep.Checks = append(rep.Checks, ch)
		if o.Done != nil {
			o.Done(ch)
		}
	}
	for _, r := range sel {
		r = usePostgres(r, o.PostgresDSN)
		r = useDSN(r, "mysql", o.MySQLDSN)
		if sp, ok := r.(interface{ WithPython(string) Runner }); ok && o.SparkPython != "" {
			r = sp.WithPython(o.SparkPython)
		}
		if m, ok := r.(interface{ WithMaxNest(int) Runner }); ok && o.MaxNest > 0 {
			r = m.WithMaxNest(o.MaxNest)
		}
		variants, layouts := runnerVariants(r, o.Variants), selectNames(r.Layouts(), o.Layouts)
		if isEngine(r.Name()) {
			variants = sqlVariants(r, o)
		}
		if len(variants) == 0 || len(layouts) == 0 {
			ch := &Check{Target: r.Name(), Status: NotRun,
				Reason: fmt.Sprintf("none of the layouts and variants asked for: it has layouts %s and variants %s",
					strings.Join(r.Layouts(), ", "), strings.Join(r.Variants(), ", "))}
			rep.Checks = append(rep.Checks, ch)
			if o.Done != nil {
				o.Done(ch)
			}
		}
		for _, variant := range variants {
			var base *compile.Program
			var compileErr error
			for _, layout := range layouts {
				if err := ctx.Err(); err != nil {
					return rep, err
				}
				ch := &Check{Target: r.Name(), Variant: variant, Layout: layout, Rows: rows.Len()}
				if base == nil && compileErr == nil {
					base, _, compileErr = compile.Compile(f, r.CompileOptions(variant))
					if compileErr == nil {
						rep.Model = base.Hash
					}
				}
				if compileErr != nil {
					ch.Status, ch.Reason = Failed, "compile: "+compileErr.Error()
				} else {
					p := base
					if o.Tamper != nil {
						p, _, _ = compile.Compile(f, r.CompileOptions(variant))
						o.Tamper(r.Name(), layout, variant, p)
					}
					fi, ok := r.(interface{ Float32Inputs(variant string) bool })
					ch.Float32Inputs = ok && fi.Float32Inputs(variant)
					got := runCheck(ctx, ch, r, p, rows, f, refFor(ch.Float32Inputs), o.TempDir)
					if o.Expected != nil && got != nil {
						ch.Expected = agree(f, rows, o.ExpectedSource, o.Expected, got, f.NumOutputs(), o.ExpectedTolerance+float64(ch.Bound))
					}
				}
				rep.Checks = append(rep.Checks, ch)
				if o.Done != nil {
					o.Done(ch)
				}
			}
		}
	}
	slices.SortStableFunc(rep.Checks, func(a, b *Check) int { return targetRank(a.Target) - targetRank(b.Target) })
	return rep, nil
}

// targetRank orders checks in a report: by the registry's order of runners
// (go, c, the SQL engines), then others.
func targetRank(name string) int {
	if i := slices.Index(targets.Runners(), name); i >= 0 {
		return i
	}
	return 100
}

// reference is the interpreter's answer for every row.
type reference struct {
	outputs []float64
	classes []int // nil for a regressor
}

// newReference scores rows with f, first rounding every value to float32
// when the target takes float32 inputs: that is all it receives.
func newReference(f *forest.Forest, x [][]float64, round32 bool) *reference {
	k := f.NumOutputs()
	ref := &reference{outputs: make([]float64, len(x)*k)}
	in := make([]float64, len(f.Features))
	for i, row := range x {
		copy(in, row)
		if round32 {
			for j, v := range in {
				in[j] = float64(float32(v))
			}
		}
		out := ref.outputs[i*k : (i+1)*k]
		f.Predict(in, out)
		if f.IsClassifier() {
			ref.classes = append(ref.classes, f.ClassOf(out))
		}
	}
	return ref
}

// runCheck scores rows with the runner, fills ch, and returns the outputs
// it got (nil when it got none).
func runCheck(ctx context.Context, ch *Check, r Runner, p *compile.Program, rows *forest.Rows, f *forest.Forest, ref *reference, tmp string) []float64 {
	want, wantCls := ref.outputs, ref.classes
	dir, err := os.MkdirTemp(tmp, "sawmill-verify-")
	if err != nil {
		ch.Status, ch.Reason = Failed, err.Error()
		return nil
	}
	defer os.RemoveAll(dir)
	res, err := r.Score(ctx, p, ch.Layout, ch.Variant, rows, dir)
	switch {
	case errors.Is(err, ErrSkip):
		ch.Status, ch.Reason = NotRun, err.Error()
		return nil
	case err != nil:
		ch.Status, ch.Reason = Failed, err.Error()
		return nil
	}
	ch.Build, ch.Run, ch.Toolchain = Millis(res.Build), Millis(res.Run), res.Toolchain
	exact, bound := r.Tolerance(ch.Variant, p)
	ch.Exact, ch.Bound = exact, Num(bound)
	k := f.NumOutputs()
	if len(res.Outputs) != len(want) {
		ch.Status = Failed
		ch.Reason = fmt.Sprintf("%d outputs for %d rows, want %d (%d per row)", len(res.Outputs), rows.Len(), len(want), k)
		return nil
	}
	m := Compare(want, res.Outputs, wantCls, res.Classes, k, exact, bound)
	ch.Matches, ch.LabelMismatches, ch.MaxAbsDiff, ch.OpenLabels = m.Exact, m.LabelMismatch, Num(m.MaxAbsDiff), m.Open
	if m.OK() {
		ch.Status = Agree
		return res.Outputs
	}
	ch.Status = Differ
	first := m.FirstRow
	if first < 0 { // classes missing altogether
		first = 0
	}
	ch.First = describeRow(f, rows, first, m.FirstOutput, want, res, wantCls)
	return res.Outputs
}

func describeRow(f *forest.Forest, rows *forest.Rows, i, output int, want []float64, res *Result, wantCls []int) *Row {
	k := f.NumOutputs()
	row := &Row{Index: i, Output: output, Origin: rowOrigin(rows, i)}
	if i < len(rows.Line) && rows.Line[i] > 0 {
		row.Line = rows.Line[i]
	}
	for j, v := range rows.Row(i) {
		row.Values = append(row.Values, NamedValue{f.Features[j], Num(v)})
	}
	for j := 0; j < k; j++ {
		row.Want = append(row.Want, Num(want[i*k+j]))
		row.Got = append(row.Got, Num(res.Outputs[i*k+j]))
	}
	if wantCls != nil {
		row.WantClass = f.Classes[wantCls[i]]
		if i < len(res.Classes) && res.Classes[i] >= 0 && res.Classes[i] < len(f.Classes) {
			row.GotClass = f.Classes[res.Classes[i]]
		} else if i < len(res.Classes) {
			row.GotClass = fmt.Sprintf("class index %d", res.Classes[i])
		} else {
			row.GotClass = "(none)"
		}
	}
	return row
}

// rowOrigin names where row i came from. Generated rows carry negative
// line numbers: -(1+j) for leaf row j, and thresholdBase-j for threshold
// row j (see verifyRows).
func rowOrigin(rows *forest.Rows, i int) string {
	if i >= len(rows.Line) {
		return fmt.Sprintf("row %d", i)
	}
	switch l := rows.Line[i]; {
	case l > 0:
		return fmt.Sprintf("line %d", l)
	case l <= thresholdBase:
		return fmt.Sprintf("generated threshold row %d", thresholdBase-l)
	case l < 0:
		return fmt.Sprintf("generated leaf row %d", -l-1)
	}
	return fmt.Sprintf("row %d", i)
}

const thresholdBase = -1 << 40

// verifyRows returns the rows to check: the given ones, generated ones, or
// both with Probes.
func verifyRows(f *forest.Forest, given *forest.Rows, o VerifyOptions, rep *Report) (*forest.Rows, error) {
	if given != nil && !slices.Equal(given.Features, f.Features) {
		return nil, fmt.Errorf("BUG: verify.Verify: rows are for features %v, the model has %v", given.Features, f.Features)
	}
	if given != nil {
		rep.Given = given.Len()
		if !o.Probes {
			return given, nil
		}
	}
	limit := o.MaxRows
	if limit == 0 {
		limit = DefaultMaxRows
	}
	leaves, thresholds, capped := ProbeRows(f, limit)
	rep.LeafRows, rep.ThresholdRows, rep.Capped = len(leaves), len(thresholds), capped
	out := &forest.Rows{Features: f.Features}
	if given != nil {
		out.Values = append(out.Values, given.Values...)
		out.Line = append(out.Line, given.Line...)
	}
	for j, x := range leaves {
		out.Values = append(out.Values, x...)
		out.Line = append(out.Line, -(1 + j))
	}
	for j, x := range thresholds {
		out.Values = append(out.Values, x...)
		out.Line = append(out.Line, thresholdBase-j)
	}
	return out, nil
}

// ProbeRows generates rows for f: leaf rows first, then threshold rows,
// duplicates dropped, at most limit in all (limit < 0: no cap). When the
// rows must be cut, leaf rows keep up to three quarters of the room and
// both kinds are thinned by even spacing; capped says it happened.
func ProbeRows(f *forest.Forest, limit int) (leaves, thresholds [][]float64, capped bool) {
	seen := map[string]bool{}
	dedup := func(rows [][]float64) [][]float64 {
		out := rows[:0]
		for _, x := range rows {
			key := probeKey(x)
			if !seen[key] {
				seen[key] = true
				out = append(out, x)
			}
		}
		return out
	}
	leaves = dedup(compile.LeafRows(f, 0))
	thresholds = dedup(compile.ThresholdRows(f, 0))
	if limit < 0 || len(leaves)+len(thresholds) <= limit {
		return leaves, thresholds, false
	}
	nl := min(len(leaves), limit*3/4)
	nt := min(len(thresholds), limit-nl)
	nl = min(len(leaves), limit-nt)
	return thinRows(leaves, nl), thinRows(thresholds, nt), true
}

// thinRows keeps n of rows, evenly spaced, in order.
func thinRows(rows [][]float64, n int) [][]float64 {
	if n >= len(rows) {
		return rows
	}
	out := make([][]float64, n)
	for i := range out {
		out[i] = rows[int(int64(i)*int64(len(rows))/int64(n))]
	}
	return out
}

func probeKey(x []float64) string {
	b := make([]byte, 0, 8*len(x))
	for _, v := range x {
		u := math.Float64bits(v)
		if math.IsNaN(v) {
			u = math.Float64bits(math.NaN())
		}
		b = strconv.AppendUint(b, u, 36)
		b = append(b, ',')
	}
	return string(b)
}

// selectRunners applies the target and dialect choices. missing lists
// targets asked for by name that no registered runner serves.
func selectRunners(all []Runner, o VerifyOptions) (sel []Runner, missing []string, err error) {
	known := map[string]bool{}
	for _, n := range append(targets.Names(), targets.Runners()...) {
		known[n] = true
	}
	for _, r := range all {
		known[r.Name()] = true
	}
	names := func() string {
		var n []string
		for k := range known {
			n = append(n, k)
		}
		slices.Sort(n)
		return strings.Join(n, ", ")
	}
	want := map[string]bool{}
	for _, t := range o.Targets {
		t = strings.ToLower(strings.TrimSpace(t))
		if !known[t] {
			return nil, nil, fmt.Errorf("target %q is unknown: use one of %s", t, names())
		}
		want[t] = true
	}
	dialects := append(slices.Clone(sqltarget.Target().Engines), AnsiDialect)
	for _, d := range o.Dialects {
		if !hasFold(dialects, d) {
			return nil, nil, fmt.Errorf("dialect %q is unknown: use one of %s", d, strings.Join(dialects, ", "))
		}
	}
	served := map[string]bool{}
	for _, r := range all {
		n := r.Name()
		t, _ := targets.Runs(n)
		ok := len(want) == 0 || want[n] || want[t.Name]
		if ok && isEngine(n) && len(sqlVariants(r, o)) == 0 {
			ok = false // none of the dialects asked for
		}
		if ok {
			sel = append(sel, r)
			served[n] = true
		}
	}
	// Name what was asked for and is not here, so a report never hides a
	// target by leaving it out.
	ask := o.Targets
	if len(ask) == 0 {
		ask = targets.Names()
	}
	for _, t := range ask {
		t = strings.ToLower(strings.TrimSpace(t))
		tg, _ := targets.Find(t)
		if tg.Engines == nil {
			if !served[t] && !slices.Contains(missing, t) {
				missing = append(missing, t)
			}
			continue
		}
		for _, e := range tg.Engines {
			// An engine is expected when no dialect is named, or when its
			// own dialect or the portable one is. MySQL and Spark read double-quoted
			// names as strings and run no ANSI text.
			ansi := hasFold(o.Dialects, AnsiDialect) && e != string(sqltarget.MySQL) && e != string(sqltarget.Spark)
			expected := len(o.Dialects) == 0 || hasFold(o.Dialects, e) || ansi
			if expected && !served[e] && !slices.Contains(missing, e) {
				missing = append(missing, e)
			}
		}
	}
	return sel, missing, nil
}

// runnerVariants applies --variant to a runner that has one of the variants
// named: "float" picks C's float build and leaves Go and SQL as they are.
func runnerVariants(r Runner, only []string) []string {
	v := selectNames(r.Variants(), only)
	if len(v) == 0 {
		return r.Variants()
	}
	return v
}

// AnsiDialect is the portable SQL dialect, a variant every SQL engine
// runner runs beside its own dialect (variant "").
const AnsiDialect = "ansi"

// isEngine reports whether the runner name is one of a target's Engines
// (SQL's), whose variants are dialects.
func isEngine(name string) bool {
	t, ok := targets.Runs(name)
	return ok && slices.Contains(t.Engines, name)
}

// sqlVariants are the variants of an SQL engine runner whose dialect is
// asked for: variant "" is the engine's own dialect, named like the engine.
func sqlVariants(r Runner, o VerifyOptions) []string {
	var out []string
	for _, v := range runnerVariants(r, o.Variants) {
		d := strings.TrimSuffix(strings.TrimSuffix(v, "shell"), "-") // "shell" runs the engine's own text, "ansi-shell" ANSI
		// The function form is the engine's own dialect.
		if d == "" || d == functionVariant {
			d = r.Name()
		}
		if len(o.Dialects) == 0 || hasFold(o.Dialects, d) {
			out = append(out, v)
		}
	}
	return out
}

func hasFold(list []string, s string) bool {
	for _, x := range list {
		if strings.EqualFold(strings.TrimSpace(x), s) {
			return true
		}
	}
	return false
}

// selectNames keeps the entries of have that are in only (all when only is empty),
// in have's order.
func selectNames(have, only []string) []string {
	if len(only) == 0 {
		return have
	}
	var out []string
	for _, h := range have {
		if hasFold(only, h) {
			out = append(out, h)
		}
	}
	return out
}

// DSNRunner is implemented by a runner that talks to a server chosen by a
// connection string.
type DSNRunner interface {
	WithDSN(dsn string) Runner
}

// usePostgres points the postgres runner at dsn through WithDSN; "" leaves
// the runner as it is.
func usePostgres(r Runner, dsn string) Runner { return useDSN(r, "postgres", dsn) }

// useDSN points runner engine at dsn through WithDSN; "" leaves the
// runner as it is.
func useDSN(r Runner, engine, dsn string) Runner {
	if d, ok := r.(DSNRunner); ok && dsn != "" && r.Name() == engine {
		return d.WithDSN(dsn)
	}
	return r
}
