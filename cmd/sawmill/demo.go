package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"time"

	"github.com/spf13/cobra"

	"sawmill/chart"
	"sawmill/compile"
	"sawmill/emit"
	"sawmill/forest"
	"sawmill/forest/train"
	"sawmill/golden"
)

// Demo defaults: the seed is part of the demo's stated result.
const (
	demoSeed      = 7
	demoTrees     = 100
	demoTrainRows = 1000
	demoScoreRows = 300
	demoMissing   = 0.02 // share of cells missing in the rows to score
	demoMarker    = ".sawmill-demo"
)

// Names of what the demo leaves in its folder.
const (
	demoTrainFile = "data/pump_sensors_invented.csv"
	demoScoreFile = "data/pump_readings_invented.csv"
	demoModelFile = "pump-health.json"
	demoPredFile  = "predictions.csv"
	demoVerifyTxt = "verify.txt"
	demoVerifyJSN = "verify.json"
	demoGoPackage = "pumphealth"
	demoCName     = "pump_health"
	demoSQLTable  = "readings"
)

type demoFlags struct {
	out     string
	seed    uint64
	trees   int
	rows    int
	threads int
	force   bool
}

func newDemoCmd() *cobra.Command {
	var fl demoFlags
	c := &cobra.Command{
		Use:   "demo [-o DIR]",
		Short: "The whole job end to end on invented pump-health data",
		Long: `demo runs sawmill's whole job on invented data, in about a minute:

  1. invents a pump-health table (vibration, bearing temperature, motor
     current, flow, suction pressure; healthy, cavitation, bearing wear,
     misalignment) from a seeded generator, and readings to score with a
     few missing cells;
  2. grows a random forest on it and prints the out-of-bag error;
  3. draws the out-of-bag error curve and the permutation importance;
  4. compiles the forest to Go, C and SQL (four dialects);
  5. verifies every target it can build here against the model, row by
     row, on the readings and on rows generated from the model;
  6. writes a README in DIR saying what each file is and how to use it.

The data is invented: it stands for no real pump. The same seed gives the
same data, the same model byte for byte and the same out-of-bag error.
Needs only Go and a C compiler; engines that are not here (a PostgreSQL
server, say) are reported as not run.`,
		Example: `  sawmill demo -o pump-demo
  sawmill demo -o pump-demo --seed 11 --trees 200`,
		Args: exactArgs(0, "no arguments (the folder is -o DIR)"),
		RunE: func(c *cobra.Command, _ []string) error { return runDemo(c, &fl) },
	}
	f := c.Flags()
	f.StringVarP(&fl.out, "output", "o", "pump-demo", "folder to leave everything in")
	f.Uint64Var(&fl.seed, "seed", demoSeed, "seed of the data and of the forest")
	f.IntVar(&fl.trees, "trees", demoTrees, "number of trees")
	f.IntVar(&fl.rows, "rows", demoTrainRows, "training rows to invent")
	f.IntVar(&fl.threads, "threads", 0, "training workers (0: one per core); the model does not depend on it")
	f.BoolVar(&fl.force, "force", false, "write into DIR even if it holds files the demo did not make")
	return c
}

// demoModel invents the training table for seed and grows the forest.
func demoModel(seed uint64, rows, trees, threads int, progress func(done, total int)) (*train.Data, *train.Result, []byte, error) {
	csvData := pumpCSV(inventPumps(rows, seed, 0), true)
	d, err := train.ReadCSV(bytes.NewReader(csvData), demoTrainFile, train.ReadOptions{Label: "state", Ignore: []string{"pump_id", "timestamp"}})
	if err != nil {
		return nil, nil, nil, fmt.Errorf("BUG: demo data does not read back: %v", err)
	}
	res, err := train.Train(d, train.Settings{Trees: trees, Seed: seed, Threads: threads, Progress: progress})
	if err != nil {
		return nil, nil, nil, err
	}
	return d, res, csvData, nil
}

// demoStep prints one numbered step and its time.
type demoStep struct {
	w     io.Writer
	n, of int
	start time.Time
	all   time.Time
}

func (s *demoStep) begin(format string, a ...any) {
	s.n++
	s.start = time.Now()
	fmt.Fprintf(s.w, "[%d/%d] %s\n", s.n, s.of, fmt.Sprintf(format, a...))
}

func (s *demoStep) done(format string, a ...any) {
	msg := fmt.Sprintf(format, a...)
	if msg != "" {
		msg += " "
	}
	fmt.Fprintf(s.w, "      %s(%s)\n", msg, seconds(time.Since(s.start)))
}

func runDemo(c *cobra.Command, fl *demoFlags) error {
	usage := func(format string, a ...any) error {
		return usageError{fmt.Errorf("sawmill demo: "+format+"\nhint: see 'sawmill demo -h'", a...)}
	}
	switch {
	case fl.trees < 1:
		return usage("--trees %d: must be at least 1", fl.trees)
	case fl.rows < 10:
		return usage("--rows %d: must be at least 10", fl.rows)
	case fl.out == "":
		return usage("-o DIR is required")
	}
	if err := demoFolder(fl.out, fl.force); err != nil {
		return err
	}
	out, stderr := c.OutOrStdout(), c.ErrOrStderr()
	st := &demoStep{w: out, of: 6, all: time.Now()}
	files := map[string][]byte{}
	put := func(name string, b []byte) error {
		path := filepath.Join(fl.out, filepath.FromSlash(name))
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			return located(path, err)
		}
		if err := forest.WriteFileAtomic(path, b, 0o644); err != nil {
			return located(path, err)
		}
		files[name] = b
		return nil
	}
	fmt.Fprintf(out, "sawmill demo: a pump-health monitor on invented data, seed %d, into %s\n", fl.seed, fl.out)

	// 1. Data.
	st.begin("inventing data: %d training rows, %d readings to score (%.0f%% of their cells missing)", fl.rows, demoScoreRows, 100*demoMissing)
	score := pumpCSV(inventPumps(demoScoreRows, fl.seed+1, demoMissing), false)
	if err := put(demoScoreFile, score); err != nil {
		return err
	}
	st.done("")

	// 2. Training.
	st.begin("growing %d trees (random forest, Breiman 2001)", fl.trees)
	var bar *progressBar
	var progress func(int, int)
	if isTerminal(stderr) {
		bar = &progressBar{w: stderr, label: "training", unit: "trees", total: fl.trees}
		progress = func(done, _ int) { bar.update(done) }
	}
	d, res, trainCSV, err := demoModel(fl.seed, fl.rows, fl.trees, fl.threads, progress)
	if bar != nil {
		bar.clear()
	}
	if err != nil {
		return err
	}
	if err := put(demoTrainFile, trainCSV); err != nil {
		return err
	}
	var model bytes.Buffer
	if err := res.Forest.Encode(&model); err != nil {
		return err
	}
	if err := put(demoModelFile, model.Bytes()); err != nil {
		return err
	}
	f := res.Forest
	st.done("out-of-bag error %.4f over %d rows; %d nodes; %s", res.OOB.Error, res.OOB.Rows, forestStats(f).nodes, demoModelFile)

	// 3. Charts.
	st.begin("drawing charts")
	var chartBuf bytes.Buffer
	if err := writeCharts(&chartBuf, filepath.Join(fl.out, "charts"), f); err != nil {
		return err
	}
	st.done("charts/%s, charts/%s", chart.CurveFile, chart.ImportanceFile)

	// 4. Compiling.
	st.begin("compiling to every target")
	compiled, err := demoCompile(f, put)
	if err != nil {
		return err
	}
	st.done("%s", strings.Join(compiled, "; "))

	// 5. Verifying.
	rows, err := forest.ReadRows(bytes.NewReader(score), demoScoreFile, f.Features, forest.RowOptions{})
	if err != nil {
		return fmt.Errorf("BUG: demo readings do not read back: %v", err)
	}
	st.begin("verifying every target against the model: %d readings and rows generated from the model", rows.Len())
	// Room for a row at every leaf (about 5,000 with the defaults) and some
	// thousands at thresholds: leaf rows get up to three quarters of it.
	o := golden.VerifyOptions{Probes: true, MaxRows: 8000}
	o.Done = func(ch *golden.Check) {
		line := fmt.Sprintf("      %-22s %s", ch.Name(), ch.Status)
		if ch.Status == golden.Agree {
			line += fmt.Sprintf(" (%d rows, build %s, score %s)", ch.Rows, seconds(time.Duration(ch.Build)), seconds(time.Duration(ch.Run)))
		} else if ch.Reason != "" {
			line += ": " + firstLine(ch.Reason)
		}
		fmt.Fprintln(out, line)
	}
	rep, err := demoVerify(f, rows, o)
	if err != nil {
		return err
	}
	var vt bytes.Buffer
	printVerify(&vt, demoModelFile, demoScoreFile, rep)
	vj, err := json.MarshalIndent(rep, "", "  ")
	if err != nil {
		return fmt.Errorf("BUG: demo: %v", err)
	}
	if err := put(demoVerifyTxt, vt.Bytes()); err != nil {
		return err
	}
	if err := put(demoVerifyJSN, append(vj, '\n')); err != nil {
		return err
	}
	st.done("%d of %d checks ran, %d agree; report in %s", len(rep.Checks)-rep.Count(golden.NotRun), len(rep.Checks), rep.Count(golden.Agree), demoVerifyTxt)

	// 6. Predictions and README.
	st.begin("writing predictions and the README")
	var pred bytes.Buffer
	if err := writePredictions(&pred, f, withKeep(rows, score), []string{"pump_id", "timestamp"}, false); err != nil {
		return err
	}
	if err := put(demoPredFile, pred.Bytes()); err != nil {
		return err
	}
	readme := demoReadme(fl, d, res, rep, files)
	if err := put("README.md", readme); err != nil {
		return err
	}
	if err := put(demoMarker, []byte("made by sawmill demo\n")); err != nil {
		return err
	}
	st.done("%s, README.md", demoPredFile)
	fmt.Fprintf(out, "done in %s: see %s\n", seconds(time.Since(st.all)), filepath.Join(fl.out, "README.md"))
	return verifyVerdict(rep, demoScoreFile, false)
}

// demoVerify checks Go and C in every layout and variant, and each SQL
// engine in its own dialect and the nested layout: the portable dialect and
// the table layout on SQL cost minutes on a forest this size, and
// sawmill verify --target sql runs them.
func demoVerify(f *forest.Forest, rows *forest.Rows, o golden.VerifyOptions) (*golden.Report, error) {
	o.Targets = []string{"go", "c"}
	rep, err := golden.Verify(context.Background(), f, rows, o)
	if err != nil {
		return nil, fmt.Errorf("BUG: demo: verify: %v", err)
	}
	o.Targets, o.Dialects, o.Layouts = []string{"sql"}, []string{"sqlite", "duckdb", "postgres"}, []string{emit.Nested}
	sql, err := golden.Verify(context.Background(), f, rows, o)
	if err != nil {
		return nil, fmt.Errorf("BUG: demo: verify: %v", err)
	}
	rep.Checks = append(rep.Checks, sql.Checks...)
	return rep, nil
}

// withKeep reads the readings again keeping the id columns for predict.
func withKeep(rows *forest.Rows, data []byte) *forest.Rows {
	r, err := forest.ReadRows(bytes.NewReader(data), demoScoreFile, rows.Features, forest.RowOptions{Keep: []string{"pump_id", "timestamp"}})
	if err != nil {
		panic("BUG: demo readings do not read back: " + err.Error())
	}
	return r
}

// demoFolder makes sure dir is empty, missing, or an earlier demo's.
func demoFolder(dir string, force bool) error {
	ents, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) || err == nil && len(ents) == 0 {
		return nil
	}
	if err != nil {
		return located(dir, err)
	}
	if _, err := os.Stat(filepath.Join(dir, demoMarker)); err == nil || force {
		return nil
	}
	return fmt.Errorf("%s: exists and was not made by sawmill demo; not writing into it\nhint: choose another -o folder, or pass --force", dir)
}

// demoCompile emits the forest for every target the command line knows,
// through the same table as sawmill compile, and reports what it wrote.
func demoCompile(f *forest.Forest, put func(string, []byte) error) ([]string, error) {
	var said []string
	for _, name := range []string{"go", "c", "sql"} {
		t, ok := findTarget(name)
		if !ok {
			said = append(said, name+": not in this build, skipped")
			continue
		}
		var variants []*compileFlags
		base := compileFlags{target: name, layout: emit.Auto, pkg: demoGoPackage, name: demoCName,
			table: demoSQLTable, keep: []string{"pump_id", "timestamp"}, dialect: "ansi"}
		dir := name
		switch name {
		case "go":
			dir = "go/" + demoGoPackage
		case "sql":
			for _, d := range []string{"ansi", "sqlite", "postgres", "duckdb"} {
				v := base
				v.dialect = d
				variants = append(variants, &v)
			}
		}
		if variants == nil {
			variants = []*compileFlags{&base}
		}
		n := 0
		for _, fl := range variants {
			p, _, err := compile.Compile(f, t.options(fl))
			if err != nil {
				return nil, fmt.Errorf("BUG: demo: compile for %s: %v", name, err)
			}
			out, err := t.emit(p, fl)
			if err != nil {
				return nil, fmt.Errorf("BUG: demo: emit %s: %v", name, err)
			}
			for _, file := range out {
				fname := file.Name
				if name == "sql" {
					fname = demoCName + "." + fl.dialect + filepath.Ext(file.Name)
				}
				if err := put(dir+"/"+fname, file.Data); err != nil {
					return nil, err
				}
				n++
			}
		}
		said = append(said, fmt.Sprintf("%s: %d files in %s/", name, n, dir))
	}
	return said, nil
}

// demoReadme says what the folder holds and how to use each piece.
func demoReadme(fl *demoFlags, d *train.Data, res *train.Result, rep *golden.Report, files map[string][]byte) []byte {
	var b bytes.Buffer
	p := func(format string, a ...any) { fmt.Fprintf(&b, format, a...) }
	f := res.Forest
	p("# sawmill demo: pump-health monitor\n\n")
	p("Everything here was made by `sawmill demo -o %s --seed %d --trees %d --rows %d`.\n", filepath.Base(fl.out), fl.seed, fl.trees, fl.rows)
	p("Running it again with the same seed gives the same data, the same model byte\nfor byte and the same out-of-bag error.\n\n")
	p("**The data is invented.** It comes from a seeded generator with\nphysics-flavoured rules and noise (see `inventPumps` in sawmill's\n`cmd/sawmill/demo_data.go`); it stands for no real pump and no real\nmeasurement. CSV has no comments, so the file names say so: `_invented`.\n\n")

	p("## The model\n\n")
	p("`%s`: a random forest of %d trees grown on %d rows, %d features, classes %s.\n",
		demoModelFile, len(f.Trees), d.Len(), len(f.Features), strings.Join(quoteAll(f.Classes), ", "))
	p("Out-of-bag error: **%.4f** (misclassification rate over the %d rows left out\nby at least one tree).\n\n", res.OOB.Error, res.OOB.Rows)
	if imp := res.OOB.Importance; imp != nil {
		idx := make([]int, len(imp))
		for i := range idx {
			idx[i] = i
		}
		slices.SortStableFunc(idx, func(a, c int) int { return cmpDesc(imp[a], imp[c]) })
		p("| feature | permutation importance |\n|---|---|\n")
		for _, j := range idx {
			p("| %s | %.4f |\n", f.Features[j], imp[j])
		}
		p("\n")
	}
	p("```sh\nsawmill inspect %s\nsawmill predict %s %s --keep pump_id,timestamp\n```\n\n", demoModelFile, demoModelFile, demoScoreFile)

	p("## Files\n\n")
	p("| file | what it is |\n|---|---|\n")
	p("| `%s` | training table: pump_id, timestamp, five readings, state |\n", demoTrainFile)
	p("| `%s` | readings to score, no state; about %.0f%% of cells empty (missing) |\n", demoScoreFile, 100*demoMissing)
	p("| `%s` | the model, in sawmill's forest format |\n", demoModelFile)
	p("| `%s` | the interpreter's scores of the readings |\n", demoPredFile)
	p("| `charts/%s` | out-of-bag error against the number of trees |\n", chart.CurveFile)
	p("| `charts/%s` | permutation importance per feature |\n", chart.ImportanceFile)
	names := make([]string, 0, len(files))
	for name := range files {
		names = append(names, name)
	}
	slices.Sort(names)
	for _, name := range names {
		switch {
		case strings.HasSuffix(name, "_test.go"):
			p("| `%s` | its test: scores rows recorded when it was emitted |\n", name)
		case strings.HasPrefix(name, "go/"):
			p("| `%s` | Go package %s: `Predict`, `PredictClass`, `FeatureNames`, `ClassNames` |\n", name, demoGoPackage)
		case strings.HasSuffix(name, ".h"):
			p("| `%s` | its header: `%s_predict`, `%s_predict_class`, `%s_NUM_FEATURES` |\n", name, demoCName, demoCName, strings.ToUpper(demoCName))
		case strings.HasPrefix(name, "c/"):
			p("| `%s` | C99 scorer, no heap, no recursion |\n", name)
		case strings.HasPrefix(name, "sql/"):
			dialect := strings.TrimSuffix(strings.TrimPrefix(filepath.Base(name), demoCName+"."), ".sql")
			p("| `%s` | one SELECT over table `%s`, %s dialect |\n", name, demoSQLTable, dialect)
		}
	}
	p("| `%s`, `%s` | what `sawmill verify` found, as text and JSON |\n\n", demoVerifyTxt, demoVerifyJSN)

	p("## Using each piece\n\n")
	p("Go: copy `go/%s` into your module and call it; it needs nothing but the\nstandard library, and `go test` in it checks rows recorded when it was\nemitted.\n\n", demoGoPackage)
	p("```go\nx := [%s.NumFeatures]float64{2.9, 71.4, 13.6, 58.2, 104.0} // %s\nclass := %s.ClassNames[%s.PredictClass(&x)]\n```\n\n",
		demoGoPackage, strings.Join(f.Features, ", "), demoGoPackage, demoGoPackage)
	p("C: add `c/%s.c` and `c/%s.h` to your build (C99, no heap, no recursion).\n\n", demoCName, demoCName)
	p("```c\n#include \"%s.h\"\ndouble x[%s_NUM_FEATURES] = {2.9, 71.4, 13.6, 58.2, 104.0};\nint cls = %s_predict_class(x);\n```\n\n", demoCName, strings.ToUpper(demoCName), demoCName)
	p("SQL: each file is one statement that reads a table `%s` whose columns are\nnamed like the features (NULL is missing) and yields pump_id, timestamp, one\ncolumn per class and the predicted label. Pick the file of your engine, or\nthe `ansi` one.\n\n", demoSQLTable)
	p("```sh\nsqlite3 pumps.db < sql/%s.sqlite.sql\n```\n\n", demoCName)

	p("## Verification\n\n")
	leafRows := fmt.Sprintf("%d rows that reach every leaf", rep.LeafRows)
	if rep.Coverage.LeavesHit < rep.Coverage.Leaves {
		leafRows = fmt.Sprintf("%d rows reaching leaves", rep.LeafRows)
	}
	p("`sawmill verify` built each target with its real toolchain or engine and\nscored %d rows (the %d readings, %s and %d rows at thresholds),\ncomparing every output with the model. Coverage: %d of %d leaves, %d of %d\nbranch directions.\n\n",
		rep.Rows, rep.Given, leafRows, rep.ThresholdRows, rep.Coverage.LeavesHit, rep.Coverage.Leaves, rep.Coverage.BranchesHit, rep.Coverage.Branches)
	p("The demo checks SQL in each engine's own dialect and the nested layout;\n`sawmill verify %s --target sql` checks the portable dialect and the\ntable layout too.\n\n", demoModelFile)
	p("| target | layout | result |\n|---|---|---|\n")
	for _, ch := range rep.Checks {
		name := ch.Target
		if ch.Variant != "" {
			name += "/" + ch.Variant
		}
		res := string(ch.Status)
		if ch.Status == golden.NotRun {
			res += ": " + firstLine(ch.Reason)
		}
		layout := ch.Layout
		if layout == "" {
			layout = "-"
		}
		p("| %s | %s | %s |\n", name, layout, strings.ReplaceAll(res, "|", "\\|"))
	}
	p("\nRun it again, on your own rows too:\n\n```sh\nsawmill verify %s --data %s\n```\n", demoModelFile, demoScoreFile)
	return b.Bytes()
}
