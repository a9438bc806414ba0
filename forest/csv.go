package forest

import (
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"slices"
)

// CSVReader reads a CSV file with a header line record by record, with the
// messages every table sawmill reads shares: the row files of predict and
// verify (RowReader) and the training tables of forest/train. CSV is read
// as RFC 4180 describes it, through encoding/csv.
type CSVReader struct {
	cr     *csv.Reader
	name   string
	Header []string // the header line's cells, as written
}

// NewCSVReader reads the header line; name is the file's name in messages.
// An empty file is an error asking for a header.
func NewCSVReader(r io.Reader, name string) (*CSVReader, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	header, err := cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%s: empty file: expected a header line naming the columns", name)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %s", name, csvError(err))
	}
	return &CSVReader{cr: cr, name: name, Header: slices.Clone(header)}, nil
}

// Next returns the next record, valid until the following call, and its
// line in the file. A record whose cell count is not the header's is added
// to p and skipped. ok is false at the end of the file, and when reading
// must stop: a CSV syntax error (added to p), or p full.
func (c *CSVReader) Next(p *Problems) (rec []string, line int, ok bool) {
	for {
		rec, err := c.cr.Read()
		if err == io.EOF {
			return nil, 0, false
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) && errors.Is(pe.Err, csv.ErrFieldCount) {
				p.Add("%s:%d: has %d cells, the header has %d", c.name, pe.StartLine, len(rec), len(c.Header))
				if p.Full() {
					return nil, 0, false
				}
				continue
			}
			p.Add("%s: %s", c.name, csvError(err))
			return nil, 0, false
		}
		// Only after a successful read: FieldPos panics on a record that
		// failed with no fields (an unterminated quote).
		line, _ := c.cr.FieldPos(0)
		return rec, line, true
	}
}

func csvError(err error) string {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return fmt.Sprintf("line %d, column %d: %v", pe.Line, pe.Column, pe.Err)
	}
	return err.Error()
}
