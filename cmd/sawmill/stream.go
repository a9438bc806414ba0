package main

import (
	"bytes"
	"encoding/csv"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"sync"

	"github.com/sawmill-dev/sawmill/forest"
)

// predictChunk is the rows predict reads, scores and writes at a time: big
// enough that handing chunks between goroutines costs nothing next to
// scoring them, small enough that the chunks in flight (a few per core)
// take a few megabytes whatever the file's size.
const predictChunk = 4096

// streamPredictions writes predict's CSV for every row rr reads: a reader
// hands chunks to one scorer per core (workers 0) and a writer puts their
// lines out in input order. At most 2*workers+2 chunks are held at once,
// so memory stays flat however long the file is. A bad cell stops the run
// with its error; lines of earlier chunks already written stay written
// (predict -o writes to a temporary file, which is then removed).
func streamPredictions(w io.Writer, f *forest.Forest, rr *forest.RowReader, keep []string, raw bool, workers int) error {
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	// The header goes out with the first chunk, so that a bad cell among
	// the first rows leaves the output empty.
	var header bytes.Buffer
	cw := csv.NewWriter(&header)
	cw.Write(predictHeader(f, keep, raw))
	cw.Flush()

	type chunk struct {
		seq  int
		rows *forest.Rows
		out  *bytes.Buffer
		err  error
	}
	tokens := make(chan struct{}, 2*workers+2) // chunks in flight
	jobs := make(chan *chunk, workers)
	done := make(chan *chunk, workers)
	stop := make(chan struct{})
	var readErr error
	go func() { // reader
		defer close(jobs)
		for seq := 0; ; seq++ {
			select {
			case tokens <- struct{}{}:
			case <-stop:
				return
			}
			rows, err := rr.Next(predictChunk)
			if err == io.EOF {
				return
			}
			if err != nil {
				readErr = err
				<-tokens
				return
			}
			jobs <- &chunk{seq: seq, rows: rows}
		}
	}()
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for ch := range jobs {
				ch.out = new(bytes.Buffer)
				ch.err = writeRows(ch.out, f, ch.rows, keep, raw)
				ch.rows = nil
				done <- ch
			}
		}()
	}
	go func() { wg.Wait(); close(done) }()

	// The writer: chunks in input order, the early ones parked until their
	// turn.
	var werr error
	parked := map[int]*chunk{}
	next := 0
	for ch := range done {
		parked[ch.seq] = ch
		for c, ok := parked[next]; ok; c, ok = parked[next] {
			delete(parked, next)
			next++
			if werr == nil && c.err != nil {
				werr = c.err
			}
			if werr == nil && header.Len() > 0 {
				_, werr = w.Write(header.Bytes())
				header.Reset()
			}
			if werr == nil {
				_, werr = w.Write(c.out.Bytes())
			}
			if werr != nil {
				select {
				case <-stop:
				default:
					close(stop)
				}
			}
			<-tokens
		}
	}
	if werr != nil {
		return werr
	}
	if readErr != nil { // set before jobs closed, so before done closed
		return readErr
	}
	if header.Len() > 0 { // no rows: the header alone
		_, werr = w.Write(header.Bytes())
	}
	return werr
}

// atomicFile is a file written under a temporary name in its folder and
// renamed over path by commit, so a failed run leaves no partial file
// (the rule forest.WriteFileAtomic follows for files written at once).
type atomicFile struct {
	*os.File
	path string
}

func createAtomic(path string) (*atomicFile, error) {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return nil, err
	}
	return &atomicFile{File: tmp, path: path}, nil
}

func (a *atomicFile) commit() error {
	err := a.Chmod(0o644)
	if cerr := a.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(a.Name(), a.path)
	}
	if err != nil {
		os.Remove(a.Name())
	}
	return err
}

func (a *atomicFile) abort() {
	a.Close()
	os.Remove(a.Name())
}
