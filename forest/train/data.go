package train

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/forest"
)

// Data is a training table: a feature matrix and one label per row.
type Data struct {
	Features []string  // feature names, in column order
	X        []float64 // row-major, len(Features) values per row; all finite
	Label    string    // name of the label column, for provenance
	Task     forest.Task
	// Classes are the class labels in output order (classification only).
	Classes []string
	// Y is, per row, the regression target, or the index in Classes of the
	// row's class.
	Y []float64
	// Line is the file line of each row, for messages; may be nil.
	Line []int
}

// Len is the number of rows.
func (d *Data) Len() int { return len(d.Y) }

// ReadOptions says how to read a training CSV.
type ReadOptions struct {
	Label  string      // the label column (required)
	Ignore []string    // columns that are neither features nor the label
	Task   forest.Task // "" infers: classification unless every label is a number
}

// ReadCSVFile reads a training table from a CSV file with a header line.
func ReadCSVFile(path string, o ReadOptions) (*Data, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	return ReadCSV(fh, path, o)
}

// ReadCSV reads a training table: a header line naming the columns, then one
// row per line. The label column is o.Label; every other column except those
// in o.Ignore is a feature, in file order. Every feature cell must be a
// finite number: a missing (empty or NaN) cell, an infinity or a non-number
// is an error naming the file line and column. All problems are reported,
// up to forest.MaxProblems.
//
// With no task given, the table is a classification problem when any label
// is not a number, and a regression otherwise; but when every label is a
// whole number, at most MaxClassCodes distinct, both readings are common
// (class codes such as wine's 0, 1, 2; counts or ratings) and a wrong
// guess costs a whole training run, so ReadCSV asks for the task instead
// of choosing. Classes are the distinct
// labels sorted numerically when all are numbers, else byte-wise.
func ReadCSV(r io.Reader, name string, o ReadOptions) (*Data, error) {
	if o.Label == "" {
		return nil, fmt.Errorf("%s: no label column given\nhint: name the column to predict with --label", name)
	}
	switch o.Task {
	case "", forest.Classification, forest.Regression:
	default:
		return nil, fmt.Errorf("task %q is unknown: use classification or regression", o.Task)
	}
	cr, err := forest.NewCSVReader(r, name)
	if err != nil {
		return nil, err
	}
	header := cr.Header
	var p forest.Problems
	cols := make(map[string]int, len(header))
	names := make([]string, len(header))
	for i, h := range header {
		h = strings.TrimSpace(h)
		if i == 0 {
			h = strings.TrimPrefix(h, "\ufeff")
		}
		names[i] = h
		if j, dup := cols[h]; dup {
			p.Add("%s:1: columns %d and %d are both named %q", name, j+1, i+1, h)
		}
		cols[h] = i
	}
	label, ok := cols[o.Label]
	if !ok {
		label = -1 // no column is the label: an ignored column is not it
		p.Add("%s:1: no column named %q (the label)\nhint: the columns are %s", name, o.Label, quoteList(names))
	}
	skip := make([]bool, len(header))
	for _, ig := range o.Ignore {
		c, ok := cols[ig]
		if !ok {
			p.Add("%s:1: no column named %q (asked to ignore it)", name, ig)
			continue
		}
		if c == label {
			p.Add("%s:1: column %q is the label and cannot be ignored", name, ig)
		}
		skip[c] = true
	}
	var feat []int
	d := &Data{Label: o.Label}
	for i := range header {
		if i != label && !skip[i] {
			feat = append(feat, i)
			d.Features = append(d.Features, names[i])
		}
	}
	if p.Len() == 0 && len(feat) == 0 {
		p.Add("%s:1: no feature columns: every column is the label or ignored", name)
	}
	if p.Len() > 0 {
		return nil, p.Err()
	}

	var labels []string
	// Per feature column, the cells that are not finite numbers: the first
	// few are named by line, the rest counted, so that a column of ids
	// gives a short message with a hint instead of one line per row.
	const perColumn = 3
	badCells := make([]int, len(feat))
	for {
		rec, line, ok := cr.Next(&p)
		if !ok {
			break
		}
		for j, c := range feat {
			v, msg := forest.ParseCell(rec[c])
			switch {
			case msg == "" && math.IsNaN(v):
				msg = "missing value"
			case msg == "" && math.IsInf(v, 0):
				msg = fmt.Sprintf("%q is infinite: training needs finite values", rec[c])
			}
			if msg != "" {
				if badCells[j] < perColumn {
					p.Add("%s:%d: column %q: %s", name, line, d.Features[j], msg)
				}
				badCells[j]++
			}
			d.X = append(d.X, v)
		}
		lv := strings.TrimSpace(rec[label])
		if lv == "" {
			p.Add("%s:%d: column %q: missing label", name, line, o.Label)
		}
		labels = append(labels, lv)
		d.Line = append(d.Line, line)
	}
	// Columns where no cell is a number (ids, timestamps) are named together
	// in one hint, every one of them.
	var wholly []string
	hint := ""
	for j, n := range badCells {
		switch {
		case n == len(labels) && n > 0:
			p.Add("%s: column %q: no cell is a finite number", name, d.Features[j])
			wholly = append(wholly, d.Features[j])
		case n > perColumn:
			p.Add("%s: column %q: %d more cells are missing or not numbers", name, d.Features[j], n-perColumn)
		}
		if n > 0 && hint == "" {
			hint = "hint: training needs every feature cell to be a finite number; fill or drop the rows named, or leave a column out with --ignore"
		}
	}
	if len(wholly) > 0 {
		hint = "hint: leave such columns out with --ignore " + strings.Join(append(slices.Clone(o.Ignore), wholly...), ",")
	}
	if p.Len() > 0 && hint != "" {
		return nil, fmt.Errorf("%w\n%s", p.Err(), hint)
	}
	if p.Len() > 0 {
		return nil, p.Err()
	}
	if len(labels) == 0 {
		return nil, fmt.Errorf("%s: no rows after the header", name)
	}
	if err := d.setLabels(labels, o.Task, name); err != nil {
		return nil, err
	}
	return d, nil
}

// setLabels decides the task and fills Y (and Classes).
func (d *Data) setLabels(labels []string, task forest.Task, name string) error {
	nums := make([]float64, len(labels))
	numeric := true
	firstBad := -1
	for i, s := range labels {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			numeric = false
			if firstBad < 0 {
				firstBad = i
			}
		}
		nums[i] = v
	}
	if task == "" && numeric {
		if codes := classCodes(nums); codes != nil {
			return fmt.Errorf("%s: column %q: every label is a whole number, %d distinct (%s): class codes or a quantity?\nhint: pass --task classification to predict the classes, or --task regression to predict a number",
				name, d.Label, len(codes), codeList(codes))
		}
	}
	if task == "" {
		task = forest.Regression
		if !numeric {
			task = forest.Classification
		}
	}
	d.Task = task
	d.Y = make([]float64, len(labels))
	if task == forest.Regression {
		if !numeric {
			return fmt.Errorf("%s:%d: column %q: %q is not a finite number, and a regression needs numeric labels\nhint: use --task classification to predict classes",
				name, d.lineOf(firstBad), d.Label, labels[firstBad])
		}
		copy(d.Y, nums)
		return nil
	}
	seen := map[string]bool{}
	for _, s := range labels {
		if !seen[s] {
			seen[s] = true
			d.Classes = append(d.Classes, s)
		}
	}
	if numeric {
		val := make(map[string]float64, len(d.Classes))
		for i, s := range labels {
			val[s] = nums[i]
		}
		slices.SortFunc(d.Classes, func(a, b string) int {
			if c := cmpFloat(val[a], val[b]); c != 0 {
				return c
			}
			return strings.Compare(a, b)
		})
	} else {
		slices.Sort(d.Classes)
	}
	if len(d.Classes) < 2 {
		return fmt.Errorf("%s: column %q holds one class only (%q): a classifier needs at least two", name, d.Label, d.Classes[0])
	}
	index := make(map[string]int, len(d.Classes))
	for i, c := range d.Classes {
		index[c] = i
	}
	for i, s := range labels {
		d.Y[i] = float64(index[s])
	}
	return nil
}

// MaxClassCodes is the most distinct whole-number labels that read as
// class codes as readily as a quantity: up to it, ReadCSV asks for the task
// rather than guess it.
const MaxClassCodes = 20

// classCodes returns the distinct labels, sorted, when every one is a whole
// number and there are at most MaxClassCodes of them; else nil.
func classCodes(nums []float64) []float64 {
	seen := map[float64]bool{}
	var codes []float64
	for _, v := range nums {
		if v != math.Trunc(v) {
			return nil
		}
		if !seen[v] {
			if len(codes) == MaxClassCodes {
				return nil
			}
			seen[v] = true
			codes = append(codes, v)
		}
	}
	slices.Sort(codes)
	return codes
}

// codeList prints up to six codes, "0, 1, 2" or "1, 2, 3, ..., 12".
func codeList(codes []float64) string {
	var s []string
	for i, v := range codes {
		if i == 5 && len(codes) > 6 {
			s = append(s, "...", strconv.FormatFloat(codes[len(codes)-1], 'g', -1, 64))
			break
		}
		s = append(s, strconv.FormatFloat(v, 'g', -1, 64))
	}
	return strings.Join(s, ", ")
}

func (d *Data) lineOf(i int) int {
	if i < len(d.Line) {
		return d.Line[i]
	}
	return i + 2
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

func quoteList(s []string) string {
	q := make([]string, len(s))
	for i, x := range s {
		q[i] = strconv.Quote(x)
	}
	return strings.Join(q, ", ")
}

// check verifies that d is a usable table before training.
func (d *Data) check() error {
	p := len(d.Features)
	n := len(d.Y)
	switch {
	case p == 0:
		return errors.New("training data has no features")
	case n == 0:
		return errors.New("training data has no rows")
	case len(d.X) != n*p:
		return fmt.Errorf("training data has %d values for %d rows of %d features", len(d.X), n, p)
	}
	for i, v := range d.X {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("row %d, feature %q: %v: training needs finite values", i/p, d.Features[i%p], v)
		}
	}
	switch d.Task {
	case forest.Classification:
		if len(d.Classes) < 2 {
			return errors.New("a classifier needs at least two classes")
		}
		for i, y := range d.Y {
			if y != math.Trunc(y) || y < 0 || int(y) >= len(d.Classes) {
				return fmt.Errorf("row %d: class index %v is not one of the %d classes", i, y, len(d.Classes))
			}
		}
	case forest.Regression:
		for i, y := range d.Y {
			if math.IsNaN(y) || math.IsInf(y, 0) {
				return fmt.Errorf("row %d: target %v is not finite", i, y)
			}
		}
	default:
		return fmt.Errorf("task %q is unknown: use classification or regression", d.Task)
	}
	return nil
}
