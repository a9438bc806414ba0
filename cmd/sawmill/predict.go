package main

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"io"
	"strconv"

	"github.com/spf13/cobra"

	"sawmill/forest"
)

func newPredictCmd() *cobra.Command {
	var out string
	var keep []string
	var raw bool
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
			return runPredict(c, args[0], args[1], out, keep, raw)
		},
	}
	c.Flags().BoolVar(&raw, "raw", false, "print the scores before the output transform, one column per output")
	c.Flags().StringVarP(&out, "output", "o", "", "write the CSV to this file instead of standard output")
	c.Flags().StringSliceVar(&keep, "keep", nil, "columns to copy into the output, comma-separated (ids)")
	return c
}

func runPredict(c *cobra.Command, modelPath, rowsPath, outPath string, keep []string, raw bool) error {
	f, err := readModel(modelPath)
	if err != nil {
		return err
	}
	rows, err := forest.ReadRowsFile(rowsPath, f.Features, forest.RowOptions{Keep: keep})
	if err != nil {
		return located(rowsPath, err)
	}
	if outPath == "" {
		bw := bufio.NewWriter(c.OutOrStdout())
		if err := writePredictions(bw, f, rows, keep, raw); err != nil {
			return err
		}
		return bw.Flush()
	}
	var buf bytes.Buffer
	if err := writePredictions(&buf, f, rows, keep, raw); err != nil {
		return err
	}
	if err := forest.WriteFileAtomic(outPath, buf.Bytes(), 0o644); err != nil {
		return located(outPath, err)
	}
	return nil
}

// readModel reads a model file, with errors that start with its name.
func readModel(path string) (*forest.Forest, error) {
	f, err := forest.ReadFile(path)
	if err != nil {
		return nil, located(path, err)
	}
	return f, nil
}

// writePredictions writes the header and one line per row: the model's
// outputs, or with raw its scores before the transform.
func writePredictions(w io.Writer, f *forest.Forest, rows *forest.Rows, keep []string, raw bool) error {
	cw := csv.NewWriter(w)
	header := append([]string(nil), keep...)
	logistic := f.IsClassifier() && f.NumOutputs() == 1
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
	if err := cw.Write(header); err != nil {
		return err
	}
	out := make([]float64, k)
	rec := make([]string, 0, len(header))
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

// num prints v in Go's shortest round-trip form.
func num(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
