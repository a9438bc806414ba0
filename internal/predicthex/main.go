// Command predicthex prints what the interpreter (forest.Predict) gives for
// golden cases, every output as its float64 bit pattern in hex, so that a
// build for another architecture (GOARCH=arm64 under qemu-aarch64, where Go
// may fuse x*y+z into one instruction) can be held bit for bit against the
// host's. Each argument is a case folder holding model.json and rows.csv;
// per row it prints the case, the row and the outputs on the rows as given,
// then the same on the rows rounded to float32 (what the float C API
// receives).
//
//	predicthex golden/testdata/edge-softmax ...
package main

import (
	"bufio"
	"fmt"
	"os"
	"path/filepath"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
)

func main() {
	w := bufio.NewWriter(os.Stdout)
	for _, dir := range os.Args[1:] {
		if err := printCase(w, dir); err != nil {
			fmt.Fprintln(os.Stderr, "predicthex:", err)
			os.Exit(1)
		}
	}
	if err := w.Flush(); err != nil {
		fmt.Fprintln(os.Stderr, "predicthex:", err)
		os.Exit(1)
	}
}

// printCase writes goldencase.HexLines(dir's model, dir's rows).
func printCase(w *bufio.Writer, dir string) error {
	f, err := forest.ReadFile(filepath.Join(dir, "model.json"))
	if err != nil {
		return err
	}
	rows, err := forest.ReadRowsFile(filepath.Join(dir, "rows.csv"), f.Features, forest.RowOptions{})
	if err != nil {
		return err
	}
	for _, l := range goldencase.HexLines(filepath.Base(dir), f, rows) {
		w.WriteString(l)
		w.WriteByte('\n')
	}
	return nil
}
