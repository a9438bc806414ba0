package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"

	"github.com/spf13/cobra"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
)

// trainRun is one `sawmill train`, handed to the extra outputs: before
// training with the paths and flags only, after it with the data and the
// result too.
type trainRun struct {
	DataPath  string
	ModelPath string
	Force     bool // --force: replace files sawmill did not write
	Data      *train.Data
	Result    *train.Result
	Stdout    io.Writer
	Stderr    io.Writer
}

// trainOutput is an optional extra output of `sawmill train` (plots of the
// out-of-bag curve, say). check runs before training and refuses files the
// output may not write (an input, a file of the user's); write runs once
// the model is written. Both do nothing when the output's flags were not
// given.
type trainOutput struct {
	check, write func(r *trainRun) error
}

// trainOutputs declare their flags on the command. Adding one is one line
// here.
var trainOutputs = []func(c *cobra.Command) trainOutput{plotsOutput}

type trainFlags struct {
	label, output, task string
	ignore              []string
	trees, mtry         int
	minLeaf, maxDepth   int
	maxBins             int
	fraction            float64
	seed                uint64
	threads             int
	importance          bool
	force               bool
}

func newTrainCmd() *cobra.Command {
	var fl trainFlags
	c := &cobra.Command{
		Use:   "train DATA.csv --label COL -o MODEL.json",
		Short: "Grow a random forest from a CSV table",
		Long: `Grow a random forest (Breiman 2001) from a CSV file with a header line.

The label column is --label; every other column is a feature, in file order,
except those named by --ignore. Every feature cell must be a finite number.
The task is classification when any label is not a number (or with
--task classification), else regression. Classes are the distinct labels,
sorted (numerically when all are numbers).

Each tree grows on a bootstrap sample, fully grown unless --max-depth or
--min-leaf stop it, trying --mtry features at every node (default ⌊√p⌋ for
classification, max(1, ⌊p/3⌋) for regression). The out-of-bag error, its
curve over the trees and the permutation importance of each feature are
stored in the model's provenance. The same seed gives the same model, byte
for byte, whatever --threads says.

--max-bins N puts every split on one of at most N-1 quantile edges of its
feature's column (as histogram-based boosting does), so thresholds repeat
across trees and the C target's binned layout (--layout binned) needs
8-bit bins when N <= 255.`,
		Example: `  # pumps.csv: vibration_rms,bearing_temp_c,motor_current_a,flow_m3h,suction_pressure_kpa,pump_id,state
  sawmill train pumps.csv --label state --ignore pump_id -o pump-health.json

  # a smaller, reproducible forest
  sawmill train pumps.csv --label state --ignore pump_id --trees 100 --seed 7 -o pump-health.json`,
		Args: exactArgs(1, "one training CSV file"),
	}
	f := c.Flags()
	f.StringVar(&fl.label, "label", "", "the column to predict (required)")
	f.StringVarP(&fl.output, "output", "o", "", "write the model to this file (required)")
	f.StringVar(&fl.task, "task", "", "classification or regression (default: classification unless every label is a number)")
	f.StringSliceVar(&fl.ignore, "ignore", nil, "columns to leave out, comma-separated (ids, timestamps)")
	f.IntVar(&fl.trees, "trees", train.DefaultTrees, "number of trees")
	f.IntVar(&fl.mtry, "mtry", 0, "features tried at each node (default ⌊√p⌋, regression max(1, ⌊p/3⌋))")
	f.IntVar(&fl.minLeaf, "min-leaf", 0, "least bootstrap draws in a leaf (default 1, regression 5)")
	f.IntVar(&fl.maxDepth, "max-depth", 0, "deepest node, the root being depth 0 (0: unlimited)")
	f.IntVar(&fl.maxBins, "max-bins", 0, "split only at N-1 quantile edges per feature, so thresholds repeat (for the binned C layout; 0: anywhere)")
	f.Float64Var(&fl.fraction, "sample-fraction", 1, "bootstrap draws per tree as a share of the rows")
	f.Uint64Var(&fl.seed, "seed", 1, "random seed")
	f.IntVar(&fl.threads, "threads", 0, "parallel workers (0: one per core)")
	f.BoolVar(&fl.importance, "importance", true, "compute the permutation importance (--importance=false to skip)")
	f.BoolVar(&fl.force, "force", false, "replace an existing -o file (or chart) that sawmill did not write")
	var outputs []trainOutput
	for _, add := range trainOutputs {
		outputs = append(outputs, add(c))
	}
	c.RunE = func(c *cobra.Command, args []string) error {
		return runTrain(c, args[0], &fl, outputs)
	}
	return c
}

func runTrain(c *cobra.Command, dataPath string, fl *trainFlags, outputs []trainOutput) error {
	usage := func(format string, a ...any) error {
		return usageError{fmt.Errorf("sawmill train: "+format+"\nhint: see 'sawmill train -h'", a...)}
	}
	switch {
	case fl.label == "":
		return usage("--label is required: name the column to predict")
	case fl.output == "":
		return usage("-o is required: name the model file to write")
	}
	task := forest.Task(fl.task)
	switch task {
	case "", forest.Classification, forest.Regression:
	default:
		return usage("--task %q: use classification or regression", fl.task)
	}
	if fl.trees < 1 {
		return usage("--trees %d: must be at least 1", fl.trees)
	}
	// Fail before a long training run, not after it.
	if fi, err := os.Stat(filepath.Dir(fl.output)); err != nil || !fi.IsDir() {
		return fmt.Errorf("%s: the folder to write the model in does not exist", fl.output)
	}
	if err := checkOutput(fl.output, []string{dataPath}, fl.force, "a model sawmill train wrote", trainedModel); err != nil {
		return err
	}
	r := &trainRun{DataPath: dataPath, ModelPath: fl.output, Force: fl.force, Stdout: c.OutOrStdout(), Stderr: c.ErrOrStderr()}
	for _, o := range outputs {
		if err := o.check(r); err != nil {
			return err
		}
	}

	d, err := train.ReadCSVFile(dataPath, train.ReadOptions{Label: fl.label, Ignore: fl.ignore, Task: task})
	if err != nil {
		return located(dataPath, err)
	}
	s := train.Settings{
		Trees: fl.trees, Mtry: fl.mtry, MinLeaf: fl.minLeaf, MaxDepth: fl.maxDepth, MaxBins: fl.maxBins,
		SampleFraction: fl.fraction, Seed: fl.seed, Threads: fl.threads,
		SkipImportance: !fl.importance,
	}
	stderr := c.ErrOrStderr()
	var bar *progressBar
	if isTerminal(stderr) {
		bar = &progressBar{w: stderr, label: "training", unit: "trees", total: fl.trees}
		s.Progress = func(done, _ int) { bar.update(done) }
	}
	res, err := train.Train(d, s)
	if bar != nil {
		bar.clear()
	}
	var se *train.SettingError
	if errors.As(err, &se) {
		return usage("--%s %s: %s", se.Name, se.Value, se.Problem)
	}
	if err != nil {
		return err
	}
	if err := forest.WriteFile(fl.output, res.Forest); err != nil {
		return located(fl.output, err)
	}
	printTrainSummary(r.Stdout, dataPath, fl.output, d, res)
	r.Data, r.Result = d, res
	for _, o := range outputs {
		if err := o.write(r); err != nil {
			return err
		}
	}
	return nil
}

// located makes a file-system error lead with the path, as sawmill's
// messages do ("data.csv: no such file or directory" rather than Go's
// "open data.csv: ..."); other errors already name their location.
func located(path string, err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return fmt.Errorf("%s: %w", path, pe.Err)
	}
	var le *os.LinkError
	if errors.As(err, &le) {
		return fmt.Errorf("%s: %w", path, le.Err)
	}
	return err
}

func printTrainSummary(w io.Writer, dataPath, modelPath string, d *train.Data, res *train.Result) {
	f := res.Forest
	st := forestStats(f)
	what := fmt.Sprintf("%d classes", len(f.Classes))
	if f.Task == forest.Regression {
		what = "regression"
	}
	fmt.Fprintf(w, "trained %d trees on %s: %d rows, %d features, %s\n", len(f.Trees), dataPath, d.Len(), len(f.Features), what)
	fmt.Fprintf(w, "nodes %d (%d leaves), depth %d to %d, mean %.1f\n", st.nodes, st.leaves, st.depthMin, st.depthMax, st.depthMean)
	o := res.OOB
	switch {
	case o.Rows == 0:
		fmt.Fprintln(w, "out-of-bag: no row was left out by any tree")
	case f.Task == forest.Regression:
		fmt.Fprintf(w, "out-of-bag MSE %.4g, R² %.4f (%d rows)\n", o.Error, o.R2, o.Rows)
	default:
		fmt.Fprintf(w, "out-of-bag error %.4f (%d rows)\n", o.Error, o.Rows)
	}
	if o.Importance != nil {
		idx := make([]int, len(o.Importance))
		for i := range idx {
			idx[i] = i
		}
		slices.SortStableFunc(idx, func(a, b int) int { return cmpDesc(o.Importance[a], o.Importance[b]) })
		fmt.Fprint(w, "most important:")
		for i, j := range idx[:min(3, len(idx))] {
			sep := ","
			if i == 0 {
				sep = ""
			}
			fmt.Fprintf(w, "%s %s %.4g", sep, f.Features[j], o.Importance[j])
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "wrote %s\n", modelPath)
}
