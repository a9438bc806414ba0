// Command train-bench writes the invented benchmark table and times
// sawmill's forest training on it. run.sh drives it next to scikit-learn.
//
//	go run ./bench/train -gen data.csv
//	go run ./bench/train -fit data.csv -trees 100 -threads 2
package main

import (
	"flag"
	"fmt"
	"os"
	"syscall"
	"time"

	"github.com/sawmill-dev/sawmill/bench/train/synth"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
)

func main() {
	gen := flag.String("gen", "", "write the invented table to this CSV file")
	rows := flag.Int("rows", 20000, "rows to generate")
	seed := flag.Uint64("seed", 1, "seed")
	fit := flag.String("fit", "", "train on this CSV file and print the time")
	trees := flag.Int("trees", 100, "trees to grow")
	threads := flag.Int("threads", 2, "threads")
	oob := flag.Bool("importance", false, "also compute the permutation importance")
	flag.Parse()
	if err := run(*gen, *rows, *seed, *fit, *trees, *threads, *oob); err != nil {
		fmt.Fprintln(os.Stderr, "train-bench:", err)
		os.Exit(1)
	}
}

func run(gen string, rows int, seed uint64, fit string, trees, threads int, importance bool) error {
	if gen != "" {
		x, y := synth.Table(rows, seed)
		fh, err := os.Create(gen)
		if err != nil {
			return err
		}
		if err := synth.WriteCSV(fh, x, y); err != nil {
			fh.Close()
			return err
		}
		if err := fh.Close(); err != nil {
			return err
		}
	}
	if fit == "" {
		return nil
	}
	d, err := train.ReadCSVFile(fit, train.ReadOptions{Label: "label", Task: forest.Classification})
	if err != nil {
		return err
	}
	start := time.Now()
	res, err := train.Train(d, train.Settings{Trees: trees, Threads: threads, Seed: seed, SkipImportance: !importance})
	if err != nil {
		return err
	}
	secs := time.Since(start).Seconds()
	nodes := 0
	for i := range res.Forest.Trees {
		nodes += res.Forest.Trees[i].NumNodes()
	}
	var ru syscall.Rusage
	syscall.Getrusage(syscall.RUSAGE_SELF, &ru)
	fmt.Printf("fit_seconds %.3f\nnodes %d\noob_error %.4f\npeak_rss_mb %.1f\n", secs, nodes, res.OOB.Error, float64(ru.Maxrss)/1024)
	return nil
}
