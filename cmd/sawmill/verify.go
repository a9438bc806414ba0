package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

type verifyFlags struct {
	data      string
	targets   []string
	layouts   []string
	variants  []string
	dialects  []string
	postgres  string
	mysql     string
	spark     string
	maxNest   int
	maxRows   int
	probes    bool
	require   bool
	asJSON    bool
	boards    bool // add the QEMU runners (verify.Config.Boards)
	intLeaves int  // C: integer leaves (verify.Config.IntLeaves)
	expected  string
	tolerance float64
}

// verifyTamper, when set (by tests only), edits each compiled program before
// it is emitted, planting a fault that verify must catch.
var verifyTamper func(target, layout, variant string, p *compile.Program)

func newVerifyCmd() *cobra.Command {
	var fl verifyFlags
	c := &cobra.Command{
		Use:   "verify MODEL.json [--data ROWS.csv] [--target go,c,sql]",
		Short: "Emit, build and run every target and compare each row with the model",
		Long: `verify emits the model for each target, builds it with the real toolchain
(the Go toolchain, the C compiler) or loads it into the engine (SQLite,
DuckDB, PostgreSQL), scores every row, and holds each output against
sawmill's reference interpreter: bit for bit where the target computes in
double precision, within a stated bound where it cannot (C's float variant,
which also receives its inputs as float32: its reference is the model on
the rows rounded to float32).

Rows come from --data, or are generated from the model itself: one row for
every reachable leaf, and rows at every threshold, at its float64 and
float32 neighbours and with the value missing, at most --max-rows of them.
The coverage line says which share of the leaves and of the branch
directions the rows exercised.

Each target, variant and layout gets a line: rows checked, rows that agree,
the largest absolute difference, predicted labels that differ, build and
scoring time. The first row that disagrees is shown in full.

With --expected OUTPUTS.csv, the model and every target are also held
against outputs that the library which trained the model recorded for the
--data rows, within --tolerance (default 1e-12) plus a target's own bound:
the proof then reaches the original library, not only sawmill's
interpreter. OUTPUTS.csv has a header; its columns are named like the
model's outputs (as sawmill predict heads them, so a predict file serves),
or it has exactly one column per output, in output order; one line per
--data row, in the same order. The first row that is off is shown in full.

A --data file of more than a million rows is checked a chunk at a time,
each target rebuilt for each chunk, so memory stays flat.

Exit status: 0 when every check that ran agreed; 1 when a row disagreed or
a target failed to emit, build or run. A target whose toolchain or engine
is not on this machine is printed as "not run" with the reason and does not
fail the run, unless --require is given.`,
		Example: `  sawmill verify pump-health.json
  sawmill verify pump-health.json --data readings.csv --target go,c
  sawmill verify pump-health.json --target sql --dialect sqlite,postgres --postgres postgres://localhost/scratch
  sawmill verify pump-health.json --target c --variant float --layout table --json
  sawmill verify forest.json --data rows.csv --expected sklearn_outputs.csv --tolerance 1e-9`,
		Args: exactArgs(1, "MODEL.json"),
		RunE: func(c *cobra.Command, args []string) error { return runVerify(c, args[0], &fl) },
	}
	f := c.Flags()
	f.StringVar(&fl.data, "data", "", "rows to check (CSV with a header naming the features); default: rows generated from the model")
	f.StringSliceVar(&fl.targets, "target", nil, "targets, comma-separated: go, c, sql, or an engine (sqlite, duckdb, postgres, mysql, spark); default all")
	f.StringSliceVar(&fl.layouts, "layout", nil, "layouts to check (nested, table, branchless, binned); default each target's own")
	f.StringSliceVar(&fl.variants, "variant", nil, "variants to check, e.g. double,float for C; default all")
	f.StringSliceVar(&fl.dialects, "dialect", nil, "SQL engines to check: sqlite, duckdb, postgres, mysql, spark; default all")
	f.StringVar(&fl.postgres, "postgres", "", "PostgreSQL connection string (default $SAWMILL_POSTGRES_DSN, else PostgreSQL's own PGHOST, PGUSER, ... defaults)")
	f.StringVar(&fl.mysql, "mysql", "", "MySQL or MariaDB server, user[:password]@tcp(host:port)/database (default $SAWMILL_MYSQL_DSN; with neither, mysql is skipped)")
	f.StringVar(&fl.spark, "spark-python", "", "Python with pyspark for the spark engine (default $SAWMILL_SPARK_PYTHON, else python3 when it imports pyspark)")
	f.IntVar(&fl.maxNest, "max-nest", 0, "SQL: nest CASE at most N deep, as compile --max-nest (default: each dialect's)")
	f.IntVar(&fl.maxRows, "max-rows", verify.DefaultMaxRows, "most rows to generate (0: no cap)")
	f.BoolVar(&fl.probes, "probes", false, "with --data, add the generated rows too")
	f.BoolVar(&fl.require, "require", false, "fail when a target could not run (no compiler, no server)")
	f.BoolVar(&fl.asJSON, "json", false, "print the report as JSON")
	f.IntVar(&fl.intLeaves, "int-leaves", 0, "C: check the lossy build of compile --int-leaves 16|32: outputs within its derived bound, labels wherever the bound decides them")
	f.BoolVar(&fl.boards, "boards", false, "also run the C on boards under QEMU (target c-board: variants m4, m4-float, m0, rv32, arm64) and the Go on arm64 (go-arm64)")
	f.StringVar(&fl.expected, "expected", "", "outputs the training library recorded for the --data rows (CSV: columns named like predict's, or one per output), to hold the model and every target against")
	f.Float64Var(&fl.tolerance, "tolerance", DefaultTolerance, "with --expected, the largest |difference| from a recorded output that still agrees")
	return c
}

func runVerify(c *cobra.Command, modelPath string, fl *verifyFlags) error {
	if fl.maxNest < 0 || fl.maxNest == 1 {
		return usageError{fmt.Errorf("sawmill verify: --max-nest %d: must be 2 or more (0: each dialect's default)\nhint: see 'sawmill verify -h'", fl.maxNest)}
	}
	if fl.maxRows < 0 {
		return usageError{fmt.Errorf("sawmill verify: --max-rows %d: must be 0 (no cap) or more\nhint: see 'sawmill verify -h'", fl.maxRows)}
	}
	if fl.intLeaves != 0 && fl.intLeaves != 16 && fl.intLeaves != 32 {
		return usageError{fmt.Errorf("sawmill verify: --int-leaves %d: must be 16 or 32\nhint: see 'sawmill verify -h'", fl.intLeaves)}
	}
	runners := verify.RunnersWith(verify.Config{Boards: fl.boards, IntLeaves: fl.intLeaves})
	if err := checkVerifyFlags(fl, runners); err != nil {
		return err
	}
	if err := checkExpectedFlags(fl); err != nil {
		return err
	}
	f, err := readModel(modelPath)
	if err != nil {
		return err
	}
	var rr *forest.RowReader
	if fl.data != "" {
		in, err := os.Open(fl.data)
		if err != nil {
			return located(fl.data, err)
		}
		defer in.Close()
		if rr, err = forest.NewRowReader(in, fl.data, f.Features, forest.RowOptions{}); err != nil {
			return err
		}
	}
	var ex *expectedReader
	if fl.expected != "" {
		var closer io.Closer
		if ex, closer, err = openExpected(fl.expected, f); err != nil {
			return err
		}
		defer closer.Close()
	}
	o := verify.VerifyOptions{
		Targets: fl.targets, Layouts: fl.layouts, Variants: fl.variants, Dialects: fl.dialects,
		PostgresDSN: fl.postgres, MySQLDSN: fl.mysql, SparkPython: fl.spark, MaxNest: fl.maxNest, MaxRows: fl.maxRows, Probes: fl.probes, Tamper: verifyTamper,
		Runners: runners,
	}
	if fl.maxRows == 0 {
		o.MaxRows = -1
	}
	stderr := c.ErrOrStderr()
	if isTerminal(stderr) {
		o.Done = func(ch *verify.Check) { fmt.Fprintf(stderr, "verify: %s: %s\n", ch.Name(), ch.Status) }
	}
	o.ExpectedSource, o.ExpectedTolerance = fl.expected, fl.tolerance
	rep, err := verifyStream(context.Background(), f, rr, ex, fl.data, o)
	if err != nil {
		return err
	}
	out := c.OutOrStdout()
	if fl.asJSON {
		b, err := json.MarshalIndent(rep, "", "  ")
		if err != nil {
			return fmt.Errorf("BUG: verify: %v", err)
		}
		fmt.Fprintf(out, "%s\n", b)
	} else {
		printVerify(out, modelPath, fl.data, rep)
	}
	return verifyVerdict(rep, fl.data, fl.require)
}

// checkExpectedFlags: --expected compares outputs recorded for given rows.
func checkExpectedFlags(fl *verifyFlags) error {
	switch {
	case fl.expected != "" && fl.data == "":
		return usageError{fmt.Errorf("sawmill verify: --expected needs --data, the rows the outputs were recorded for\nhint: see 'sawmill verify -h'")}
	case fl.expected != "" && fl.probes:
		return usageError{fmt.Errorf("sawmill verify: --expected holds only the --data rows; --probes adds rows no library recorded\nhint: run verify --probes separately")}
	case !(fl.tolerance >= 0) || math.IsInf(fl.tolerance, 0):
		return usageError{fmt.Errorf("sawmill verify: --tolerance %v: must be a finite number, 0 or more\nhint: see 'sawmill verify -h'", fl.tolerance)}
	}
	return nil
}

// verifyVerdict is the command's error: nil when every check that ran
// agreed (and, with require, every check ran).
func verifyVerdict(rep *verify.Report, dataPath string, require bool) error {
	var bad []string
	for _, ch := range rep.Checks {
		switch {
		case ch.Status == verify.Differ:
			bad = append(bad, fmt.Sprintf("%s differs at %s", ch.Name(), rowPlace(ch.First, dataPath)))
		case ch.Status == verify.Failed:
			bad = append(bad, fmt.Sprintf("%s failed: %s", ch.Name(), firstLine(ch.Reason)))
		case ch.Status == verify.NotRun && require:
			bad = append(bad, fmt.Sprintf("%s could not run (--require): %s", ch.Name(), firstLine(ch.Reason)))
		}
	}
	failed := len(bad)
	var off []string
	if e := rep.Expected; !e.OK() {
		off = append(off, fmt.Sprintf("the model is off the recorded outputs %s at %s", e.Source, rowPlace(e.First, dataPath)))
	}
	for _, ch := range rep.Checks {
		if e := ch.Expected; !e.OK() {
			off = append(off, fmt.Sprintf("%s is off the recorded outputs at %s", ch.Name(), rowPlace(e.First, dataPath)))
		}
	}
	if failed == 0 && len(off) > 0 {
		return fmt.Errorf("verify: %s", strings.Join(off, "\n  "))
	}
	bad = append(bad, off...)
	if ran := len(rep.Checks) - rep.Count(verify.NotRun); ran == 0 && len(bad) == 0 {
		return fmt.Errorf("verify: no check ran, so nothing was verified\nhint: install a toolchain named under \"not run\", or choose other --target values")
	}
	if len(bad) == 0 {
		return nil
	}
	return fmt.Errorf("verify: %d of %d checks did not pass:\n  %s", failed, len(rep.Checks), strings.Join(bad, "\n  "))
}

// rowPlace names a mismatching row for a person: the file and line for a
// given row, else the generated row's origin, with its index.
func rowPlace(r *verify.Row, dataPath string) string {
	if r == nil {
		return "no row (output count differs)"
	}
	if r.Line > 0 && dataPath != "" {
		return fmt.Sprintf("%s:%d", dataPath, r.Line)
	}
	return fmt.Sprintf("%s (row %d)", r.Origin, r.Index)
}

func firstLine(s string) string {
	if i := strings.IndexByte(s, '\n'); i >= 0 {
		return s[:i] + " ..."
	}
	return s
}

func printVerify(w io.Writer, modelPath, dataPath string, rep *verify.Report) {
	fmt.Fprintf(w, "model     %s (sha256 %s)\n", modelPath, shortHash(rep.Model))
	switch {
	case rep.Given > 0 && rep.LeafRows+rep.ThresholdRows > 0:
		fmt.Fprintf(w, "rows      %d: %d from %s, %d generated leaf rows, %d threshold rows\n",
			rep.Rows, rep.Given, dataPath, rep.LeafRows, rep.ThresholdRows)
	case dataPath != "":
		fmt.Fprintf(w, "rows      %d from %s\n", rep.Rows, dataPath)
	default:
		capped := ""
		if rep.Capped {
			capped = " (thinned to --max-rows)"
		}
		fmt.Fprintf(w, "rows      %d generated: %d leaf rows, %d threshold rows%s\n", rep.Rows, rep.LeafRows, rep.ThresholdRows, capped)
	}
	cv := rep.Coverage
	fmt.Fprintf(w, "coverage  leaves %d of %d (%.1f%%), branch directions %d of %d (%.1f%%)\n\n",
		cv.LeavesHit, cv.Leaves, 100*cv.LeafShare(), cv.BranchesHit, cv.Branches, 100*cv.BranchShare())

	var table strings.Builder
	tw := tabwriter.NewWriter(&table, 2, 8, 2, ' ', 0)
	fmt.Fprintln(tw, "target\tlayout\tresult\trows\tagree\tmax |diff|\tlabels off\tbuild\tscore\tcompared")
	for _, ch := range rep.Checks {
		name := ch.Target
		if ch.Variant != "" {
			name += "/" + ch.Variant
		}
		layout := ch.Layout
		if layout == "" {
			layout = "-"
		}
		switch ch.Status {
		case verify.NotRun, verify.Failed:
			// Every cell, even empty, keeps the columns aligned.
			fmt.Fprintf(tw, "%s\t%s\t%s\t\t\t\t\t\t\t\n", name, layout, ch.Status)
			continue
		}
		cmp := "bit for bit"
		if !ch.Exact {
			cmp = fmt.Sprintf("within %.3g", float64(ch.Bound))
		}
		if ch.Float32Inputs {
			cmp += ", float32 inputs"
		}
		if ch.OpenLabels > 0 {
			cmp += fmt.Sprintf(", %d rows within 2x the bound of a label change", ch.OpenLabels)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%d\t%s\t%d\t%s\t%s\t%s\n", name, layout, ch.Status, ch.Rows, ch.Matches,
			diffString(float64(ch.MaxAbsDiff)), ch.LabelMismatches, seconds(time.Duration(ch.Build)), seconds(time.Duration(ch.Run)), cmp)
	}
	tw.Flush()
	for _, line := range strings.SplitAfter(table.String(), "\n") {
		nl := strings.HasSuffix(line, "\n")
		fmt.Fprint(w, strings.TrimRight(line, " \n"))
		if nl {
			fmt.Fprintln(w)
		}
	}

	printToolchains(w, rep)
	printExpected(w, rep, dataPath)
	for _, ch := range rep.Checks {
		switch ch.Status {
		case verify.Failed:
			fmt.Fprintf(w, "\n%s: failed: %s\n", ch.Name(), strings.TrimRight(ch.Reason, "\n"))
		case verify.Differ:
			printMismatch(w, ch, dataPath)
		}
	}
	if rep.Count(verify.NotRun) > 0 {
		fmt.Fprintln(w, "\nnot run (does not fail verify without --require):")
		tw = tabwriter.NewWriter(w, 2, 8, 2, ' ', 0)
		for _, ch := range rep.Checks {
			if ch.Status == verify.NotRun {
				fmt.Fprintf(tw, "  %s\t%s\n", ch.Name(), firstLine(ch.Reason))
			}
		}
		tw.Flush()
	}
	ran := len(rep.Checks) - rep.Count(verify.NotRun)
	fmt.Fprintf(w, "\n%d of %d checks ran; %d agree", ran, len(rep.Checks), rep.Count(verify.Agree))
	if n := rep.Count(verify.Differ) + rep.Count(verify.Failed); n > 0 {
		fmt.Fprintf(w, ", %d did not", n)
	}
	fmt.Fprintln(w)
}

// printToolchains names the compilers (and versions) that built each
// target, once per target and variant.
func printToolchains(w io.Writer, rep *verify.Report) {
	var lines [][2]string
	for _, ch := range rep.Checks {
		if ch.Toolchain == "" {
			continue
		}
		name := ch.Target
		if ch.Variant != "" {
			name += "/" + ch.Variant
		}
		if !slices.ContainsFunc(lines, func(l [2]string) bool { return l == [2]string{name, ch.Toolchain} }) {
			lines = append(lines, [2]string{name, ch.Toolchain})
		}
	}
	if len(lines) == 0 {
		return
	}
	fmt.Fprintln(w, "\nbuilt with")
	tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', 0)
	for _, l := range lines {
		fmt.Fprintf(tw, "  %s\t%s\n", l[0], l[1])
	}
	tw.Flush()
}

func printMismatch(w io.Writer, ch *verify.Check, dataPath string) {
	r := ch.First
	fmt.Fprintf(w, "\n%s: first mismatch at %s\n", ch.Name(), rowPlace(r, dataPath))
	if r == nil {
		return
	}
	tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', 0)
	for _, v := range r.Values {
		fmt.Fprintf(tw, "  %s\t%s\n", v.Name, cell(float64(v.Value)))
	}
	tw.Flush()
	if ch.Float32Inputs {
		fmt.Fprintln(w, "  (the target takes float32 inputs: want is the model on these values rounded to float32)")
	}
	tw = tabwriter.NewWriter(w, 2, 8, 2, ' ', 0)
	cls := func(c string) string {
		if c == "" {
			return ""
		}
		return "\tclass " + c
	}
	fmt.Fprintf(tw, "  want\t%s%s\n", cells(r.Want), cls(r.WantClass))
	fmt.Fprintf(tw, "  got\t%s%s\n", cells(r.Got), cls(r.GotClass))
	tw.Flush()
	if r.Output >= 0 {
		d := math.Abs(float64(r.Got[r.Output]) - float64(r.Want[r.Output]))
		fmt.Fprintf(w, "  output %d differs by %s; %d of %d rows agree, %d labels differ\n", r.Output, diffString(d), ch.Matches, ch.Rows, ch.LabelMismatches)
	} else {
		fmt.Fprintf(w, "  the predicted class differs; %d of %d rows agree, %d labels differ\n", ch.Matches, ch.Rows, ch.LabelMismatches)
	}
}

// cells prints outputs as cell does, tab-separated for a tabwriter.
func cells(v []verify.Num) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = cell(float64(x))
	}
	return strings.Join(s, "\t")
}

// cell prints a value as predict does, with missing shown as empty cells
// are in CSV: "(missing)".
func cell(v float64) string {
	if math.IsNaN(v) {
		return "(missing)"
	}
	return num(v)
}

func diffString(d float64) string {
	if d == 0 {
		return "0"
	}
	return fmt.Sprintf("%.3g", d)
}

func seconds(d time.Duration) string {
	switch {
	case d <= 0:
		return "-"
	case d < time.Second:
		return fmt.Sprintf("%dms", d.Milliseconds())
	}
	return fmt.Sprintf("%.2fs", d.Seconds())
}

func shortHash(h string) string {
	if len(h) > 12 {
		return h[:12]
	}
	return h
}
