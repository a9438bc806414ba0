package main

import (
	"context"
	"fmt"
	"io"
	"math"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

// verifyChunk is the most rows of --data verify holds at once. A file
// within it is verified in one pass, as a whole; a longer one a chunk at a
// time, every target built afresh for each chunk (a rebuild costs seconds,
// next to minutes of scoring a million rows in an SQL engine), with memory
// bounded by the chunk whatever the file's size. A variable for tests.
var verifyChunk = 1 << 20

// verifyStream runs verify.Verify over the rows rr reads (none when rr is
// nil), a chunk at a time, and merges the reports into one, as if every
// row had been checked at once: counts add up, the largest difference and
// the first mismatching row are over all rows, and the coverage is that of
// all the rows (kept exact by holding one row per leaf first reached).
// ex, when set, gives the recorded outputs of each chunk's rows.
func verifyStream(ctx context.Context, f *forest.Forest, rr *forest.RowReader, ex *expectedReader, dataPath string, o verify.VerifyOptions) (*verify.Report, error) {
	if rr == nil {
		rep, err := verify.Verify(ctx, f, nil, o)
		return rep, optionsError(err)
	}
	var total *verify.Report
	seen := 0 // rows read before this chunk
	cov := newCoverRows(f)
	rows, err := rr.Next(verifyChunk)
	if err == io.EOF {
		rows, err = &forest.Rows{Features: f.Features}, nil
	}
	for n := 0; err == nil; n++ {
		co := o
		if n > 0 {
			co.Probes = false // generated rows are checked once, with the first chunk
		}
		if ex != nil {
			if co.Expected, err = ex.next(rows.Len(), dataPath, seen+rows.Len()); err != nil {
				return nil, err
			}
		}
		rep, verr := verify.Verify(ctx, f, rows, co)
		if verr != nil {
			return nil, optionsError(verr)
		}
		next, nerr := rr.Next(verifyChunk)
		if nerr != nil && nerr != io.EOF {
			return nil, nerr
		}
		if n == 0 && nerr == io.EOF { // one chunk: the report as it is
			total = rep
			break
		}
		cov.add(rows)
		if n == 0 && o.Probes {
			limit := o.MaxRows
			if limit == 0 {
				limit = verify.DefaultMaxRows
			}
			leaves, thresholds, _ := verify.ProbeRows(f, limit)
			cov.addAll(leaves)
			cov.addAll(thresholds)
		}
		total = mergeReports(total, rep)
		if nerr == io.EOF {
			c := compile.Cover(f, cov.rows)
			total.Coverage = verify.Coverage{Leaves: c.Leaves, LeavesHit: c.LeavesHit, Branches: c.Branches, BranchesHit: c.BranchesHit}
			break
		}
		seen += rows.Len()
		rows = next
	}
	if err != nil {
		return nil, err
	}
	if ex != nil {
		if err := ex.end(dataPath); err != nil {
			return nil, err
		}
	}
	return total, nil
}

// optionsError is verify.Verify's error, which is about the options asked
// for (an unknown target, say), as a usage error.
func optionsError(err error) error {
	if err == nil {
		return nil
	}
	return usageError{fmt.Errorf("sawmill verify: %v\nhint: see 'sawmill verify -h'", err)}
}

// coverRows keeps one row for every leaf of every tree some row reached:
// compile.Cover over them equals Cover over all the rows, since the nodes
// a row passes are exactly the ancestors of its leaves.
type coverRows struct {
	f    *forest.Forest
	hit  [][]bool // per tree, per node
	rows [][]float64
}

func newCoverRows(f *forest.Forest) *coverRows {
	c := &coverRows{f: f, hit: make([][]bool, len(f.Trees))}
	for i := range f.Trees {
		c.hit[i] = make([]bool, f.Trees[i].NumNodes())
	}
	return c
}

func (c *coverRows) add(rows *forest.Rows) {
	for i := range rows.Len() {
		c.addRow(rows.Row(i))
	}
}

func (c *coverRows) addAll(rows [][]float64) {
	for _, x := range rows {
		c.addRow(x)
	}
}

func (c *coverRows) addRow(x []float64) {
	keep := false
	for ti := range c.f.Trees {
		if l := c.f.LeafIndex(&c.f.Trees[ti], x); !c.hit[ti][l] {
			c.hit[ti][l], keep = true, true
		}
	}
	if keep {
		c.rows = append(c.rows, append([]float64(nil), x...))
	}
}

// mergeReports adds the report of the next chunk to total (nil for the
// first), check by check.
func mergeReports(total, rep *verify.Report) *verify.Report {
	if total == nil {
		return rep
	}
	offset := total.Rows
	total.Rows += rep.Rows
	total.Given += rep.Given
	total.Expected = mergeAgreement(total.Expected, rep.Expected, offset)
	byName := map[string]*verify.Check{}
	for _, ch := range total.Checks {
		byName[ch.Target+"|"+ch.Name()] = ch
	}
	for _, ch := range rep.Checks {
		t := byName[ch.Target+"|"+ch.Name()]
		if t == nil {
			total.Checks = append(total.Checks, ch)
			continue
		}
		t.Rows += ch.Rows
		t.Matches += ch.Matches
		t.LabelMismatches += ch.LabelMismatches
		t.MaxAbsDiff = verify.Num(math.Max(float64(t.MaxAbsDiff), float64(ch.MaxAbsDiff)))
		t.Build += ch.Build
		t.Run += ch.Run
		if t.First == nil && ch.First != nil {
			ch.First.Index += offset
			t.First = ch.First
		}
		t.Expected = mergeAgreement(t.Expected, ch.Expected, offset)
		switch {
		case t.Status == verify.Failed:
		case ch.Status == verify.Failed:
			t.Status, t.Reason = ch.Status, ch.Reason
		case ch.Status == verify.Differ:
			t.Status = verify.Differ
		}
	}
	return total
}

func mergeAgreement(a, b *verify.Agreement, offset int) *verify.Agreement {
	if a == nil || b == nil {
		if a == nil {
			return b
		}
		return a
	}
	a.Rows += b.Rows
	a.Matches += b.Matches
	a.MaxAbsDiff = verify.Num(math.Max(float64(a.MaxAbsDiff), float64(b.MaxAbsDiff)))
	if a.First == nil && b.First != nil {
		b.First.Index += offset
		a.First = b.First
	}
	return a
}
