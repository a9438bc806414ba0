// Command sql-bench scores rows with emitted SQL in each engine and prints
// rows per second, prepare time and statement size beside the interpreter
// and the generated Go, for a random forest grown by sawmill on the Breast
// Cancer Wisconsin (Diagnostic) data (W. H. Wolberg, W. N. Street, O. L.
// Mangasarian, UCI Machine Learning Repository, 1995, as shipped with
// scikit-learn), resampled with noise to the number of rows asked.
//
//	go run -tags duckdb ./bench/sql -trees 100 -rows 100000
//	go run -tags duckdb ./bench/sql -trees 500 -rows 100000 -layouts auto
//
// Every run is checked against the interpreter before its figures count.
package main

import (
	"context"
	"flag"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"strings"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/verify"
)

func main() {
	data := flag.String("data", "golden/testdata/sklearn-breast-cancer/data.csv", "training CSV (label column \"label\")")
	trees := flag.Int("trees", 100, "trees to grow")
	nrows := flag.Int("rows", 100000, "rows to score")
	engines := flag.String("engines", "sqlite,duckdb,postgres", "engines to run")
	layouts := flag.String("layouts", "nested,table", "SQL layouts to run")
	withGo := flag.Bool("go", true, "also build and run the generated Go")
	flag.StringVar(&cli, "sqlite3", "sqlite3", "the native sqlite3 shell to time beside the embedded driver (skipped when not on PATH; \"\" never)")
	flag.Parse()
	if err := run(*data, *trees, *nrows, strings.Split(*engines, ","), strings.Split(*layouts, ","), *withGo); err != nil {
		fmt.Fprintln(os.Stderr, "sql-bench:", err)
		os.Exit(1)
	}
}

// cli is the sqlite3 shell to time, "" for none.
var cli string

func run(path string, trees, n int, engines, layouts []string, withGo bool) error {
	d, err := train.ReadCSVFile(path, train.ReadOptions{Label: "label"})
	if err != nil {
		return err
	}
	res, err := train.Train(d, train.Settings{Trees: trees, Seed: 1, SkipImportance: true})
	if err != nil {
		return err
	}
	f := res.Forest
	rows := resample(d, n)
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		return err
	}
	fmt.Printf("forest: %d trees, %d nodes, depth %d; %d rows of %d features\n", len(p.Trees), p.NumNodes(), p.MaxDepth(), rows.Len(), len(f.Features))
	c := &goldencase.Case{Model: f, Rows: rows}
	start := time.Now()
	want, wantCls := c.Reference()
	interp := time.Since(start)
	fmt.Printf("%-22s %12s %10s %10s %12s\n", "target", "rows/s", "prepare", "run", "SQL bytes")
	fmt.Printf("%-22s %12.0f %10s %10s %12s\n", "interpreter", float64(n)/interp.Seconds(), "-", interp.Round(time.Millisecond), "-")
	goRun := time.Duration(0)
	if withGo {
		for _, r := range verify.Runners() {
			if r.Name() != "go" {
				continue
			}
			dir, _ := os.MkdirTemp("", "sqlbench")
			defer os.RemoveAll(dir)
			res, err := r.Score(context.Background(), p, emit.Nested, "", rows, dir)
			if err != nil {
				return err
			}
			if m := verify.Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, true, 0); !m.OK() {
				return fmt.Errorf("go: %s", m)
			}
			goRun = res.Run
			fmt.Printf("%-22s %12.0f %10s %10s %12s   (build %v; run includes reading rows as text)\n", "go nested", float64(n)/res.Run.Seconds(), "-", res.Run.Round(time.Millisecond), "-", res.Build.Round(time.Millisecond))
		}
	}
	for _, e := range engines {
		r, err := verify.SQLRunner(e)
		if err != nil {
			return err
		}
		for _, l := range layouts {
			dir, _ := os.MkdirTemp("", "sqlbench")
			start := time.Now()
			res, err := r.Score(context.Background(), p, l, "", rows, dir)
			total := time.Since(start)
			os.RemoveAll(dir)
			if err != nil {
				fmt.Printf("%-22s %v\n", e+" "+l, err)
				continue
			}
			exact, bound := r.Tolerance("", p)
			if m := verify.Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound); !m.OK() {
				return fmt.Errorf("%s %s: %s", e, l, m)
			}
			dialect, _ := sqltarget.ParseDialect(map[string]string{"sqlite": "sqlite", "duckdb": "duckdb", "postgres": "postgres"}[e])
			files, _ := sqltarget.Emit(p, sqltarget.Options{Dialect: dialect, Layout: l, Keep: []string{"sawmill_row"}})
			lay, _, _ := sqltarget.Resolve(p, sqltarget.Options{Dialect: dialect, Layout: l})
			extra := fmt.Sprintf("   (%s; end to end with load %v", lay, total.Round(time.Millisecond))
			if goRun > 0 {
				extra += fmt.Sprintf("; run %.1f× go, %.1f× interpreter", res.Run.Seconds()/goRun.Seconds(), res.Run.Seconds()/interp.Seconds())
			}
			fmt.Printf("%-22s %12.0f %10s %10s %12d%s)\n", e+" "+l, float64(n)/res.Run.Seconds(), res.Build.Round(time.Millisecond), res.Run.Round(time.Millisecond), len(files[0].Data), extra)
		}
	}
	if cli == "" {
		return nil
	}
	shell, err := exec.LookPath(cli)
	if err != nil {
		fmt.Printf("%-22s skipped: %v (Debian's sqlite3 package has it)\n", "sqlite3 shell", err)
		return nil
	}
	for _, l := range layouts {
		line, err := cliSide(context.Background(), shell, p, l, rows, want, wantCls)
		if err != nil {
			return err
		}
		fmt.Println(line)
	}
	return nil
}

// resample draws n rows from the training table with replacement and adds
// Gaussian noise of a tenth of each feature's standard deviation, so that
// rows are new but lie where the data lies.
func resample(d *train.Data, n int) *forest.Rows {
	p := len(d.Features)
	sd := make([]float64, p)
	for j := 0; j < p; j++ {
		var s, s2 float64
		for i := 0; i < d.Len(); i++ {
			v := d.X[i*p+j]
			s += v
			s2 += v * v
		}
		m := s / float64(d.Len())
		sd[j] = math.Sqrt(max(0, s2/float64(d.Len())-m*m))
	}
	rng := rand.New(rand.NewPCG(1, 2))
	rows := &forest.Rows{Features: d.Features, Values: make([]float64, 0, n*p), Line: make([]int, n)}
	for r := 0; r < n; r++ {
		i := rng.IntN(d.Len())
		for j := 0; j < p; j++ {
			rows.Values = append(rows.Values, d.X[i*p+j]+0.1*sd[j]*rng.NormFloat64())
		}
		rows.Line[r] = r + 2
	}
	return rows
}
