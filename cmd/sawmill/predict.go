package main

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"io"
	"os"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/source"
)

func newPredictCmd() *cobra.Command {
	var out string
	var keep []string
	var raw bool
	var force bool
	c := &cobra.Command{
		Use:   "predict MODEL.json ROWS.csv [-o OUT.csv] [--keep id,...] [--raw]",
		Short: "Score CSV rows with the reference interpreter",
		Long: `Score every row of a CSV file with the model, using sawmill's reference
interpreter, and write CSV.

Columns of ROWS.csv are matched to the model's features by name; other
columns are ignored. An empty cell or NaN is a missing value; inf and -inf
are infinities. Any other cell that is not a number is an error naming the
line and column.

The output has the --keep columns first, then for a classifier one column
per class (named by its label, in class order; a logistic binary model
gives 1-p and p) and the predicted class, or for a regressor the column
"prediction" (a regressor of several outputs: "prediction_0",
"prediction_1", ...). Numbers are printed in Go's shortest form that reads
back exactly.

--raw prints the scores before the output transform (and before the
model's transform_scale) instead, one column per model output: "raw" for a
model of one output, else "raw_" and the class label or output index; no
class column. These are the margins boosting libraries print when asked
for raw scores.`,
		Example: `  sawmill predict pump-health.json readings.csv --keep pump_id
  sawmill predict pump-health.json readings.csv --keep pump_id,timestamp -o scores.csv
  sawmill predict booster.json readings.csv --raw`,
		Args: exactArgs(2, "a model file and a CSV file of rows"),
		RunE: func(c *cobra.Command, args []string) error {
			return runPredict(c, args[0], args[1], out, keep, raw, force)
		},
	}
	c.Flags().BoolVar(&raw, "raw", false, "print the scores before the output transform, one column per output")
	c.Flags().StringVarP(&out, "output", "o", "", "write the CSV to this file instead of standard output")
	c.Flags().StringSliceVar(&keep, "keep", nil, "columns to copy into the output, comma-separated (ids)")
	c.Flags().BoolVar(&force, "force", false, "replace an existing -o file that is not an earlier output of predict")
	return c
}

func runPredict(c *cobra.Command, modelPath, rowsPath, outPath string, keep []string, raw, force bool) error {
	f, err := readModel(modelPath)
	if err != nil {
		return err
	}
	if outPath != "" {
		header := predictHeader(f, keep, raw)
		ours := func(path string) bool { // an earlier run's output: the same header
			lines := headLines(path, 1)
			return len(lines) == 1 && string(lines[0]) == csvLine(header)
		}
		if err := checkOutput(outPath, []string{modelPath, rowsPath}, force, "an earlier output of predict (its header differs)", ours); err != nil {
			return err
		}
	}
	in, err := os.Open(rowsPath)
	if err != nil {
		return located(rowsPath, err)
	}
	defer in.Close()
	rr, err := forest.NewRowReader(in, rowsPath, f.Features, forest.RowOptions{Keep: keep})
	if err != nil {
		return err
	}
	if outPath == "" {
		bw := bufio.NewWriterSize(c.OutOrStdout(), 1<<16)
		if err := streamPredictions(bw, f, rr, keep, raw, 0); err != nil {
			return err
		}
		return bw.Flush()
	}
	af, err := createAtomic(outPath)
	if err != nil {
		return located(outPath, err)
	}
	bw := bufio.NewWriterSize(af, 1<<16)
	err = streamPredictions(bw, f, rr, keep, raw, 0)
	if err == nil {
		err = bw.Flush()
	}
	if err != nil {
		af.abort()
		return err
	}
	if err := af.commit(); err != nil {
		return located(outPath, err)
	}
	return nil
}

// readModel reads a model file of any format the source registry knows,
// with errors that start with its name.
func readModel(path string) (*forest.Forest, error) {
	r, err := readSource(path, "", source.Options{})
	if err != nil {
		return nil, err
	}
	return r.Forest, nil
}

// readSource reads a model file as the format from ("" detects it), with
// what the importer had to say about it.
func readSource(path, from string, o source.Options) (*source.Result, error) {
	r, err := source.Load(path, from, o)
	if err != nil {
		return nil, located(path, err)
	}
	return r, nil
}

// writePredictions writes the header and one line per row: the model's
// outputs, or with raw its scores before the transform.
func writePredictions(w io.Writer, f *forest.Forest, rows *forest.Rows, keep []string, raw bool) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(predictHeader(f, keep, raw)); err != nil {
		return err
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	return writeRows(w, f, rows, keep, raw)
}

// writeRows writes one line per row, without the header.
func writeRows(w io.Writer, f *forest.Forest, rows *forest.Rows, keep []string, raw bool) error {
	cw := csv.NewWriter(w)
	logistic := f.IsClassifier() && f.NumOutputs() == 1
	out := make([]float64, f.NumOutputs())
	rec := make([]string, 0, len(keep)+f.NumOutputs()+1)
	for i := range rows.Len() {
		rec = rec[:0]
		if len(keep) > 0 {
			rec = append(rec, rows.Extra[i]...)
		}
		if raw {
			f.PredictRaw(rows.Row(i), out)
			for _, v := range out {
				rec = append(rec, num(v))
			}
			if err := cw.Write(rec); err != nil {
				return err
			}
			continue
		}
		f.Predict(rows.Row(i), out)
		if logistic {
			rec = append(rec, num(1-out[0]), num(out[0]))
		} else {
			for _, v := range out {
				rec = append(rec, num(v))
			}
		}
		if f.IsClassifier() {
			rec = append(rec, f.Classes[f.ClassOf(out)])
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// predictHeader is predict's header line: the kept columns, then the
// model's outputs (see predict -h), or with raw its scores before the
// transform.
func predictHeader(f *forest.Forest, keep []string, raw bool) []string {
	header := append([]string(nil), keep...)
	k := f.NumOutputs()
	switch {
	case raw && k == 1:
		header = append(header, "raw")
	case raw && f.IsClassifier():
		for _, c := range f.Classes {
			header = append(header, "raw_"+c)
		}
	case raw:
		for j := range k {
			header = append(header, "raw_"+strconv.Itoa(j))
		}
	case f.IsClassifier():
		header = append(header, f.Classes...)
		header = append(header, "class")
	case k > 1:
		for j := range k {
			header = append(header, "prediction_"+strconv.Itoa(j))
		}
	default:
		header = append(header, "prediction")
	}
	return header
}

// csvLine is rec as one CSV line, without the line end.
func csvLine(rec []string) string {
	var b bytes.Buffer
	cw := csv.NewWriter(&b)
	cw.Write(rec)
	cw.Flush()
	return strings.TrimRight(b.String(), "\r\n")
}

// num prints v in Go's shortest round-trip form.
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
