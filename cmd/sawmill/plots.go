package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"github.com/sawmill-dev/sawmill/chart"
	"github.com/sawmill-dev/sawmill/forest"
)

// plotsOutput adds --plots DIR to sawmill train: the out-of-bag error curve
// and the permutation importance as SVG charts.
func plotsOutput(c *cobra.Command) trainOutput {
	var dir string
	c.Flags().StringVar(&dir, "plots", "", "write charts (out-of-bag error curve, importance) as SVG into this folder")
	return trainOutput{
		check: func(r *trainRun) error {
			if dir == "" {
				return nil
			}
			return checkCharts(dir, r.Force, r.DataPath, r.ModelPath)
		},
		write: func(r *trainRun) error {
			if dir == "" {
				return nil
			}
			return writeCharts(r.Stdout, dir, r.Result.Forest)
		},
	}
}

// checkCharts refuses to draw into dir over a file sawmill did not draw
// (unless force) or over one of inputs.
func checkCharts(dir string, force bool, inputs ...string) error {
	if fi, err := os.Stat(dir); err == nil && !fi.IsDir() {
		return fmt.Errorf("%s: is a file, and --plots names the folder to draw the charts in\nhint: name a folder", dir)
	}
	for _, name := range []string{chart.CurveFile, chart.ImportanceFile} {
		if err := checkOutput(filepath.Join(dir, name), inputs, force, "a chart sawmill drew", generated); err != nil {
			return err
		}
	}
	return nil
}

// writeCharts writes the charts of f into dir (created if missing) and
// names each file it wrote on w.
func writeCharts(w io.Writer, dir string, f *forest.Forest) error {
	curve, imp, err := chart.FromForest(f)
	if errors.Is(err, chart.ErrNoProvenance) {
		return fmt.Errorf("%s: no charts: %v\nhint: charts come from models grown by sawmill train", dir, err)
	}
	if err != nil {
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return located(dir, err)
	}
	write := func(name string, svg func() ([]byte, error)) error {
		b, err := svg()
		if err != nil {
			return err
		}
		path := filepath.Join(dir, name)
		if err := forest.WriteFileAtomic(path, b, 0o644); err != nil {
			return located(path, err)
		}
		fmt.Fprintf(w, "wrote %s\n", path)
		return nil
	}
	if err := write(chart.CurveFile, curve.SVG); err != nil {
		return err
	}
	if imp == nil {
		fmt.Fprintf(w, "no importance chart: importance was not computed (--importance=false)\n")
		return nil
	}
	return write(chart.ImportanceFile, imp.SVG)
}
