package forest

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
)

// Rows is a table of feature values read from a CSV file, NumFeatures values
// per row back to back, NaN where a value is missing.
type Rows struct {
	Features []string  // the model's feature names, in model order
	Values   []float64 // len = Len()*len(Features)
	// Extra holds, per row, the cells of columns asked for by name with
	// RowOptions.Keep, in the order asked.
	Extra [][]string
	Line  []int // the file's line number of each row, for messages
}

// Len is the number of rows.
func (r *Rows) Len() int { return len(r.Line) }

// Row returns row i's feature values.
func (r *Rows) Row(i int) []float64 {
	p := len(r.Features)
	return r.Values[i*p : (i+1)*p : (i+1)*p]
}

// RowOptions says which extra columns to keep.
type RowOptions struct {
	Keep []string // columns to carry through by name (need not be features)
}

// ReadRowsFile reads a CSV row file for a model with the given features.
func ReadRowsFile(path string, features []string, o RowOptions) (*Rows, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	return ReadRows(fh, path, features, o)
}

// ReadRows reads CSV with a header line. Columns are matched to features by
// name and other columns are ignored; an empty cell or NaN is missing; inf and
// -inf are infinities, as strconv reads them. Any other non-number is an
// error naming the line and column; all problems are reported up to a cap.
func ReadRows(r io.Reader, name string, features []string, o RowOptions) (*Rows, error) {
	rr, err := NewRowReader(r, name, features, o)
	if err != nil {
		return nil, err
	}
	rows, err := rr.Next(math.MaxInt)
	if err == io.EOF {
		return &Rows{Features: features}, nil
	}
	return rows, err
}

// RowReader reads a row file a chunk of rows at a time, for files of any
// size: what ReadRows does, with memory bounded by the chunk.
type RowReader struct {
	cr       *CSVReader
	name     string
	features []string
	idx      []int // the column of each feature
	keep     []int // the column of each kept column
	done     bool
}

// NewRowReader reads the header of a row file and matches its columns to
// features and to o.Keep; a problem with the header is an error naming
// every missing column.
func NewRowReader(r io.Reader, name string, features []string, o RowOptions) (*RowReader, error) {
	cr, err := NewCSVReader(r, name)
	if err != nil {
		return nil, err
	}
	header := cr.Header
	cols := make(map[string]int, len(header))
	// exact holds the header cells as written, so that a name with leading
	// or trailing spaces (the format allows any text) still finds its column.
	exact := make(map[string]int, len(header))
	var p Problems
	twice := map[string]int{} // trimmed names that two cells share: the second cell
	for i, h := range header {
		if i == 0 {
			h = strings.TrimPrefix(h, "\ufeff") // a byte-order mark from spreadsheet exports
		}
		if j, dup := exact[h]; dup {
			p.Add("%s:1: columns %d and %d are both named %q", name, j+1, i+1, h)
		} else {
			exact[h] = i
		}
		h = strings.TrimSpace(h)
		if _, dup := cols[h]; dup {
			twice[h] = i
		} else {
			cols[h] = i
		}
	}
	idx := make([]int, len(features))
	for i, f := range features {
		c, ok := exact[f]
		if !ok {
			c, ok = cols[f]
			if j, dup := twice[f]; ok && dup {
				p.Add("%s:1: columns %d and %d are both named %q once spaces are trimmed", name, c+1, j+1, f)
			}
		}
		if !ok {
			p.Add("%s:1: no column named %q, a feature of the model", name, f)
		}
		idx[i] = c
	}
	keep := make([]int, len(o.Keep))
	for i, k := range o.Keep {
		c, ok := cols[k]
		if !ok {
			p.Add("%s:1: no column named %q (asked to keep it)", name, k)
		}
		keep[i] = c
	}
	if p.Len() > 0 {
		return nil, p.Err()
	}
	return &RowReader{cr: cr, name: name, features: features, idx: idx, keep: keep}, nil
}

// Next reads up to max rows (at least one). It returns io.EOF when no row
// is left. A chunk with bad cells is an error naming each, up to a cap;
// reading stops there.
func (rr *RowReader) Next(max int) (*Rows, error) {
	if rr.done {
		return nil, io.EOF
	}
	var p Problems
	rows := &Rows{Features: rr.features}
	for rows.Len() < max {
		rec, line, ok := rr.cr.Next(&p)
		if !ok {
			rr.done = true // the end, or a problem that stops the read
			break
		}
		for i, c := range rr.idx {
			v, msg := ParseCell(rec[c])
			if msg != "" {
				p.Add("%s:%d: column %q: %s", rr.name, line, rr.features[i], msg)
			}
			rows.Values = append(rows.Values, v)
		}
		if len(rr.keep) > 0 {
			ex := make([]string, len(rr.keep))
			for i, c := range rr.keep {
				ex[i] = rec[c]
			}
			rows.Extra = append(rows.Extra, ex)
		}
		rows.Line = append(rows.Line, line)
		if p.Full() {
			break
		}
	}
	if err := p.Err(); err != nil {
		rr.done = true
		return nil, err
	}
	if rows.Len() == 0 && rr.done {
		return nil, io.EOF
	}
	return rows, nil
}

// ParseCell reads one cell: empty or NaN is missing (NaN), inf and -inf are
// infinities, anything else must be a number strconv.ParseFloat accepts and
// within float64's range. msg is non-empty when the cell is not a number.
func ParseCell(s string) (v float64, msg string) {
	t := strings.TrimSpace(s)
	if t == "" {
		return math.NaN(), ""
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil {
		if errors.Is(err, strconv.ErrRange) && !math.IsInf(v, 0) {
			return v, "" // underflow to zero or a subnormal is still the nearest double
		}
		if errors.Is(err, strconv.ErrRange) {
			return 0, fmt.Sprintf("%q is beyond the range of a float64 (write inf or -inf for an infinity)", s)
		}
		return 0, fmt.Sprintf("%q is not a number", s)
	}
	if math.IsNaN(v) {
		return math.NaN(), ""
	}
	return v, ""
}
