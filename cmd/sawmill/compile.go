package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/emit/targets"
	"github.com/sawmill-dev/sawmill/forest"
)

// target is one --target value: its entry in the registry (emit/targets)
// and, for a target with flags beyond emit.Settings, how they become its
// own options.
type target struct {
	emit.Target
	ownFlags func(p *compile.Program, fl *compileFlags) ([]emit.File, error)
}

// ownFlags are the emitters of the targets whose flags go beyond
// emit.Settings (--package, --sample, --tables; --dialect, --table, ...; --threads),
// each in its target_*.go file. Every other target emits through its
// registry entry.
var ownFlags = map[string]func(p *compile.Program, fl *compileFlags) ([]emit.File, error){
	gotarget.Name:  emitGo,
	ctarget.Name:   emitC,
	sqltarget.Name: emitSQL,
}

// allTargets lists every target of the registry.
func allTargets() []target {
	var out []target
	for _, t := range targets.All() {
		out = append(out, target{Target: t, ownFlags: ownFlags[t.Name]})
	}
	return out
}

func findTarget(name string) (target, bool) {
	t, ok := targets.Find(name)
	return target{Target: t, ownFlags: ownFlags[name]}, ok
}

// options are the compile options the flags ask of t: --float compiles a
// target's float build for float32 inputs.
func (t target) options(fl *compileFlags) compile.Options { return t.CompileOptions(fl.float) }

// emit writes p with t's own flags, or with the settings every target
// understands.
func (t target) emit(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
	if t.ownFlags != nil {
		return t.ownFlags(p, fl)
	}
	return t.Target.Emit(p, emit.Settings{Layout: fl.layout, Name: fl.name, Float: fl.float})
}

type compileFlags struct {
	target     string
	out        string
	layout     string
	pkg        string
	name       string
	float      bool
	dialect    string
	table      string
	keep       []string
	view       string
	function   string
	sample     string
	lossy      []string
	dumpAfter  string
	verbose    bool
	force      bool
	maxNest    int      // SQL: CASE nesting bound, 0 for the dialect's default
	columns    []string // SQL: feature=column pairs
	selftest   bool     // SQL and C: also write the self-test
	threads    bool     // C: also write NAME_threads.h and NAME_threads.c
	constTime  bool     // C: the constant-time walk
	boardFacts bool     // C: measure the chosen layout on boards and write the figures into NAME.h
	leafVals   bool     // C: keep classification leaves as values, not class counts
	pack       bool     // C: packed bits in the table and binned layouts (ctarget.Options.Pack)
	model      *forest.Forest
	tables     string
	budget     budgetFlags
	intFeats   []string // features that arrive as integers
	intLeaves  int      // C: leaves as scaled integers of 16 or 32 bits (lossy), 0 for exact
}

func newCompileCmd() *cobra.Command {
	fl := &compileFlags{}
	c := &cobra.Command{
		Use:   "compile MODEL.json --target go|c|sql -o DIR",
		Short: "Emit dependency-free source code that scores like the model",
		Long: `compile lowers the model to an if/else form, runs the exact passes (which
never change an output), and emits source for one target into DIR:

  go   a Go package: Predict, PredictClass, NumFeatures, FeatureNames, ...
       and a model_test.go that checks it against the model's own answers
  c    NAME.h and NAME.c, C99, no heap, no recursion
  sql  one SELECT (or CREATE VIEW) over a table whose columns are the features

Files are written through a temporary file and a rename. A file in DIR that
sawmill did not generate is never overwritten (unless --force).`,
		Example: `  sawmill compile pump-health.json --target go -o internal/pumpmodel --package pumpmodel
  sawmill compile pump-health.json --target c --name pump -o firmware/model --float
  sawmill compile pump-health.json --target sql --dialect postgres --table readings --keep pump_id -o sql/
  sawmill compile pump-health.json --target go -o out -v --dump-after prune`,
		Args: exactArgs(1, "MODEL.json"),
		RunE: func(c *cobra.Command, args []string) error { return runCompile(c, args[0], fl) },
	}
	f := c.Flags()
	f.StringVar(&fl.target, "target", "", "go, c or sql (required)")
	f.StringVarP(&fl.out, "output", "o", "", "output folder (required; created if missing)")
	f.StringVar(&fl.layout, "layout", emit.Auto, "auto, nested, table, branchless (go), binned, bitvector, block, perfect or batch (c; bitvector, block and perfect fall back to table where they cannot be written; batch: the fastest batch walk on a desktop or server, perfect where it builds, else block, else auto's)")
	f.StringVar(&fl.pkg, "package", "model", "Go: package name")
	f.StringVar(&fl.name, "name", "", "C: base name of NAME.h, NAME.c and the NAME_ prefix (default model); SQL: the file NAME.sql (default score)")
	f.BoolVar(&fl.float, "float", false, "C: float instead of double everywhere, for FPUs without double")
	f.StringVar(&fl.dialect, "dialect", "ansi", "SQL: sqlite, postgres, duckdb, ansi, mysql (MySQL 8, MariaDB 10.11) or spark (Spark SQL 4)")
	f.StringVar(&fl.table, "table", "input", "SQL: the relation to read; its columns are named like the features")
	f.StringSliceVar(&fl.keep, "keep", nil, "SQL: columns to pass through first, e.g. id,site")
	f.StringVar(&fl.view, "view", "", "SQL: wrap the query in CREATE VIEW NAME")
	f.StringVar(&fl.function, "function", "", "SQL: write functions NAME(feature, ...) (NAME_0, ... per output for several) instead of a query: postgres, duckdb, mysql, spark")
	f.StringVar(&fl.sample, "sample", "", "Go: rows (CSV) to check in the emitted test besides rows built from leaves")
	f.StringVar(&fl.tables, "tables", "auto", "Go: the table layout's arrays as literal (one line per node), base64 (a blob, builds fast at any size) or auto (literal up to 50,000 nodes)")
	f.StringSliceVar(&fl.lossy, "lossy", nil, "lossy passes to run (changes outputs; verify measures by how much)")
	f.StringVar(&fl.dumpAfter, "dump-after", "", "print the program's text form after this pass ('lower' for before any)")
	f.BoolVarP(&fl.verbose, "verbose", "v", false, "print what each pass did")
	f.BoolVar(&fl.force, "force", false, "overwrite files in DIR even if sawmill did not generate them")
	f.IntVar(&fl.maxNest, "max-nest", 0, "SQL: nest CASE at most N deep (default: what the dialect's stock engine parses, e.g. 12 for sqlite)")
	f.StringSliceVar(&fl.columns, "columns", nil, "SQL: read a feature from another column, feature=column,... (quote a pair holding a comma)")
	f.BoolVar(&fl.selftest, "selftest", false, "SQL: also write selftest.sql, which scores the probe rows verify generates and returns those that differ; C: also write NAME_selftest.c, whose NAME_selftest() returns 0 or the first probe row that differs")
	fl.budget.add(f)
	f.StringSliceVar(&fl.intFeats, "int-features", nil, "features that arrive as integers (ADC counts, enumerations): their thresholds become ⌊t⌋, exact for integer inputs; a fraction scores as its ceiling")
	f.IntVar(&fl.intLeaves, "int-leaves", 0, "C: lossy: store leaves as scaled int16 or int32 (16 or 32) summed in integers, with NAME_predict_scaled; prints and writes in NAME.h the derived error bound per output")
	addConstantTimeFlag(f, fl)
	f.BoolVar(&fl.pack, "pack", false, "C: store the table and binned layouts' split words, leaf rows and class counts at the bits the model needs (fewer bytes, a few instructions more a node)")
	f.BoolVar(&fl.leafVals, "leaf-values", false, "C: store a classification forest's leaves as numbers in the table and binned layouts, not as class counts divided at run time (faster, larger)")
	f.BoolVar(&fl.threads, "threads", false, "C: also write NAME_threads.h and NAME_threads.c: NAME_predict_batch_threads, the batch on POSIX threads (leave both out where there are none)")
	return c
}

func runCompile(c *cobra.Command, modelPath string, fl *compileFlags) error {
	if fl.target == "" {
		return usageError{fmt.Errorf("sawmill compile: --target is required: %s\nhint: see 'sawmill compile -h'", targetNames())}
	}
	t, ok := findTarget(fl.target)
	if !ok {
		return usageError{fmt.Errorf("sawmill compile: --target %q is unknown: use %s", fl.target, targetNames())}
	}
	if fl.out == "" {
		return usageError{fmt.Errorf("sawmill compile: -o DIR is required\nhint: see 'sawmill compile -h'")}
	}
	if err := targetFlags(c, t.Name); err != nil {
		return err
	}
	if err := outputFolder(fl.out); err != nil {
		return err
	}
	f, err := readModel(modelPath)
	if err != nil {
		return located(modelPath, err)
	}
	if f, err = intFeatures(c.OutOrStdout(), f, fl.intFeats); err != nil {
		return located(modelPath, err)
	}
	fl.model = f
	o := t.options(fl)
	o.Lossy = fl.lossy
	if fl.dumpAfter != "" {
		o.DumpAfter, o.Dump = fl.dumpAfter, c.OutOrStdout()
	}
	p, stats, err := compile.Compile(f, o)
	if err != nil {
		return fmt.Errorf("%s: %v", modelPath, err)
	}
	if fl.verbose {
		printPassStats(c.ErrOrStderr(), stats)
	}
	if err := constantTimeFlags(fl); err != nil {
		return err
	}
	if err := batchBudget(fl); err != nil {
		return err
	}
	if fl.budget.set() {
		if err := fitBudget(c.Context(), c.OutOrStdout(), p, fl); err != nil {
			return fmt.Errorf("%s: %v", modelPath, err)
		}
	}
	files, err := t.emit(p, fl)
	if err != nil {
		return fmt.Errorf("%s: %v", modelPath, err)
	}
	if err := writeGenerated(fl.out, files, fl.force, modelPath, fl.sample); err != nil {
		return err
	}
	if err := printIntLeafBounds(c.OutOrStdout(), p, fl); err != nil {
		return fmt.Errorf("%s: %v", modelPath, err)
	}
	size := 0
	for _, file := range files {
		size += len(file.Data)
	}
	fmt.Fprintf(c.OutOrStdout(), "%s: %d trees, %d nodes after passes (%d before), %s into %s: %s, %d bytes\n",
		modelPath, len(p.Trees), p.NumNodes(), stats[0].NodesBefore, fl.target, fl.out, plural(len(files), "file"), size)
	return nil
}

func targetNames() string { return strings.Join(targets.Names(), ", ") }

func printPassStats(w io.Writer, stats []compile.Stat) {
	tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "pass\texact\tran\tnodes before\tnodes after\tleaves after\ttime\t")
	for _, s := range stats {
		fmt.Fprintf(tw, "%s\t%v\t%v\t%d\t%d\t%d\t%v\t\n", s.Pass, s.Exact, s.Ran, s.NodesBefore, s.NodesAfter, s.LeavesAfter, s.Duration.Round(1000))
	}
	tw.Flush()
}

// writeGenerated writes every file atomically into the folder dir, after
// checking that none would replace one of inputs or a file sawmill did not
// generate, so a refusal writes nothing.
func writeGenerated(dir string, files []emit.File, force bool, inputs ...string) error {
	if fi, err := os.Stat(dir); err == nil && !fi.IsDir() {
		return fmt.Errorf("%s: is a file, and -o names the folder to write into\nhint: give a folder, e.g. -o %s", dir, folderHint(dir))
	}
	for _, f := range files {
		path := filepath.Join(dir, f.Name)
		if err := checkOutput(path, inputs, force, "a file sawmill generated", generated); err != nil {
			return err
		}
	}
	for _, f := range files {
		path := filepath.Join(dir, f.Name)
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			return err
		}
		if err := forest.WriteFileAtomic(path, f.Data, 0o644); err != nil {
			return err
		}
	}
	return nil
}
