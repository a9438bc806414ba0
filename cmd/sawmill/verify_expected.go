package main

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"text/tabwriter"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

// DefaultTolerance is verify --tolerance's default: the bound within which
// sawmill's interpreter holds scikit-learn's recorded predict_proba in the
// golden cases (golden/testdata/sklearn-*, scikit-learn 1.2.1), where
// summation order alone separates the two.
const DefaultTolerance = 1e-12

// outputNames are the names of f's outputs as sawmill predict heads them:
// the classes; for a logistic binary model, whose one output is the
// probability of the second class, that class; for a regressor
// "prediction" (or prediction0, prediction1, ... for several outputs).
func outputNames(f *forest.Forest) []string {
	k := f.NumOutputs()
	switch {
	case f.IsClassifier() && k == len(f.Classes):
		return f.Classes
	case f.IsClassifier() && k == 1 && len(f.Classes) == 2:
		return f.Classes[1:]
	case k == 1:
		return []string{"prediction"}
	}
	names := make([]string, k)
	for j := range names {
		names[j] = fmt.Sprintf("prediction%d", j)
	}
	return names
}

// expectedReader reads recorded outputs: a CSV file with a header whose
// columns are named like the model's outputs (other columns ignored, so a
// predict output serves), or that has exactly one column per output, in
// output order.
type expectedReader struct {
	cr   *csv.Reader
	name string
	cols []int
	k    int
	rows int // rows read so far
}

func newExpectedReader(r io.Reader, name string, f *forest.Forest) (*expectedReader, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	header, err := cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%s: empty file: expected a header line naming the outputs", name)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %v", name, err)
	}
	names := outputNames(f)
	at := map[string]int{}
	for i, h := range header {
		h = strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))
		if _, dup := at[h]; !dup {
			at[h] = i
		}
	}
	cols := make([]int, len(names))
	byName := true
	for j, n := range names {
		c, ok := at[n]
		if !ok {
			byName = false
			break
		}
		cols[j] = c
	}
	switch {
	case byName:
	case len(header) == len(names):
		for j := range cols {
			cols[j] = j
		}
	default:
		return nil, fmt.Errorf("%s:1: found columns %s: want columns named %s (as sawmill predict heads them), or exactly %d columns, one per output in that order",
			name, strings.Join(quoteAll(header), ", "), strings.Join(quoteAll(names), ", "), len(names))
	}
	return &expectedReader{cr: cr, name: name, cols: cols, k: len(names)}, nil
}

// next reads the outputs of n rows, back to back. Fewer rows than n is an
// error naming both files' counts.
func (e *expectedReader) next(n int, dataName string, dataRows int) ([]float64, error) {
	out := make([]float64, 0, n*e.k)
	var p forest.Problems
	for range n {
		rec, err := e.cr.Read()
		if err == io.EOF {
			return nil, fmt.Errorf("%s: has %d rows of outputs, and %s has %d rows or more", e.name, e.rows, dataName, dataRows)
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				return nil, fmt.Errorf("%s:%d: %v", e.name, pe.StartLine, pe.Err)
			}
			return nil, fmt.Errorf("%s: %v", e.name, err)
		}
		line, _ := e.cr.FieldPos(0)
		for j, c := range e.cols {
			if c >= len(rec) {
				p.Add("%s:%d: no cell for output %d", e.name, line, j)
				continue
			}
			v, msg := forest.ParseCell(rec[c])
			if msg != "" {
				p.Add("%s:%d: column %d: %s", e.name, line, c+1, msg)
			}
			out = append(out, v)
		}
		e.rows++
		if p.Full() {
			break
		}
	}
	return out, p.Err()
}

// end fails when rows are left after the last row of data.
func (e *expectedReader) end(dataName string) error {
	if _, err := e.cr.Read(); err == io.EOF {
		return nil
	}
	return fmt.Errorf("%s: has more rows of outputs than %s has rows (%d)", e.name, dataName, e.rows)
}

// openExpected opens the recorded outputs for f.
func openExpected(path string, f *forest.Forest) (*expectedReader, io.Closer, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, nil, located(path, err)
	}
	e, err := newExpectedReader(fh, path, f)
	if err != nil {
		fh.Close()
		return nil, nil, err
	}
	return e, fh, nil
}

// printExpected shows how the interpreter and every check agree with the
// recorded outputs, and the first row that differs for each, in full.
func printExpected(w io.Writer, rep *verify.Report, dataPath string) {
	e := rep.Expected
	if e == nil {
		return
	}
	fmt.Fprintf(w, "\nrecorded outputs %s, within %.3g (plus a target's own bound where it is not bit-exact)\n", e.Source, float64(e.Tolerance))
	tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', 0)
	line := func(name string, a *verify.Agreement) {
		verdict := "agree"
		if !a.OK() {
			verdict = "differ"
		}
		fmt.Fprintf(tw, "  %s\t%s\t%d of %d rows\tmax |diff| %s\n", name, verdict, a.Matches, a.Rows, diffString(float64(a.MaxAbsDiff)))
	}
	line("model (interpreter)", e)
	for _, ch := range rep.Checks {
		if ch.Expected != nil {
			line(ch.Name(), ch.Expected)
		}
	}
	tw.Flush()
	show := func(name string, a *verify.Agreement) {
		if a.OK() || a.First == nil {
			return
		}
		r := a.First
		fmt.Fprintf(w, "\n%s: first row off the recorded outputs at %s\n", name, rowPlace(r, dataPath))
		tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', 0)
		for _, v := range r.Values {
			fmt.Fprintf(tw, "  %s\t%s\n", v.Name, cell(float64(v.Value)))
		}
		tw.Flush()
		tw = tabwriter.NewWriter(w, 2, 8, 2, ' ', 0)
		fmt.Fprintf(tw, "  recorded\t%s\n", cells(r.Want))
		fmt.Fprintf(tw, "  got\t%s\n", cells(r.Got))
		tw.Flush()
		fmt.Fprintf(w, "  output %d is off by more than %.3g\n", r.Output, float64(a.Tolerance))
	}
	show("model (interpreter)", e)
	for _, ch := range rep.Checks {
		if ch.Expected != nil {
			show(ch.Name(), ch.Expected)
		}
	}
}
