package gotarget

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/sawmill-dev/sawmill/bench/train/synth"
	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
)

// BenchmarkLayouts holds the emitted Go of every layout against the
// interpreter on forests grown by sawmill's trainer on the invented
// benchmark table (bench/train/synth, 20,000 rows of 20 features), scored on
// 20,000 fresh rows of the same table:
//
//	go test ./emit/gotarget -run '^$' -bench Layouts -benchtime 1x
//
// Each size builds one module with a package per layout and a driver that
// checks every output (Predict's and PredictBatch's) against the
// interpreter's bits, then times 25 passes over the rows per contender,
// interleaved, the interpreter among them, in this thread's CPU time (so that
// on a shared machine the time others get does not count; the wall clock
// where the system has no per-thread time). It prints the best and the
// median ns/row, ns per split visited and the speedup over the interpreter
// (medians), with the load average.
func BenchmarkLayouts(b *testing.B) {
	if _, err := exec.LookPath("go"); err != nil {
		b.Skip("no go command on PATH: the benchmark builds the emitted code")
	}
	data, rows := benchTable()
	series := []struct {
		name     string
		maxDepth int
		trees    []int
	}{
		{"full", 0, []int{2, 12, 24, 48}},
		{"depth8", 8, []int{25, 125, 250}},
	}
	for _, s := range series {
		res, err := train.Train(data, train.Settings{Trees: slices.Max(s.trees), Seed: 1, SkipImportance: true, MaxDepth: s.maxDepth})
		if err != nil {
			b.Fatal(err)
		}
		for _, nt := range s.trees {
			f := *res.Forest
			f.Trees = f.Trees[:nt]
			b.Run(fmt.Sprintf("%s/trees=%d", s.name, nt), func(b *testing.B) {
				benchForest(b, &f, rows)
			})
		}
	}
}

func benchForest(b *testing.B, f *forest.Forest, rows []float64) {
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		b.Fatal(err)
	}
	nf, k := len(f.Features), f.NumOutputs()
	n := len(rows) / nf
	want := f.PredictBatch(rows)
	visits := 0
	for r := 0; r < n; r++ {
		for ti := range f.Trees {
			t := &f.Trees[ti]
			for i := 0; t.Left[i] != -1; visits++ {
				if rows[r*nf+t.Feature[i]] <= t.Threshold[i] {
					i = t.Left[i]
				} else {
					i = t.Right[i]
				}
			}
		}
	}
	perRow := float64(visits) / float64(n)

	dir := b.TempDir()
	// table4 is the table walk four trees wide whatever the depth, as it
	// was before the eight-lane walk (on forests deeper than laneDepth the
	// two are the same code, and their spread is the run's noise).
	// table64 is the table walk with PredictBatch's blocks of maxBlockRows
	// rows whatever the forest's size, as before forests beyond
	// bigForestBytes took bigger blocks.
	layouts := []string{emit.Nested, emit.Table, "table4", "table64", emit.Branchless}
	for _, l := range layouts {
		o := Options{Package: l, Layout: l, NoTest: true}
		switch l {
		case "table4":
			o.Layout, o.lanes = emit.Table, 4
		case "table64":
			o.Layout, o.blockRows = emit.Table, maxBlockRows
		}
		files, err := Emit(p, o)
		if err != nil {
			b.Fatal(err)
		}
		if err := os.MkdirAll(filepath.Join(dir, l), 0o755); err != nil {
			b.Fatal(err)
		}
		for _, fl := range files {
			if err := os.WriteFile(filepath.Join(dir, l, fl.Name), fl.Data, 0o644); err != nil {
				b.Fatal(err)
			}
		}
	}
	writeFloats(b, filepath.Join(dir, "rows.bin"), rows)
	writeFloats(b, filepath.Join(dir, "want.bin"), want)
	// The driver imports sawmill/forest from this checkout, so that the
	// interpreter is timed in the same process, interleaved with the layouts.
	root, err := filepath.Abs(filepath.Join("..", ".."))
	if err != nil {
		b.Fatal(err)
	}
	mod := fmt.Sprintf("module bench\n\ngo 1.21\n\nrequire github.com/sawmill-dev/sawmill v0.0.0\n\nreplace github.com/sawmill-dev/sawmill => %s\n", root)
	if err := os.WriteFile(filepath.Join(dir, "go.mod"), []byte(mod), 0o644); err != nil {
		b.Fatal(err)
	}
	sum, err := os.ReadFile(filepath.Join(root, "go.sum"))
	if err != nil {
		b.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "go.sum"), sum, 0o644); err != nil {
		b.Fatal(err)
	}
	model, err := forestJSON(f)
	if err != nil {
		b.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "model.json"), model, 0o644); err != nil {
		b.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "main.go"), []byte(benchDriver(layouts, nf, k)), 0o644); err != nil {
		b.Fatal(err)
	}
	start := time.Now()
	build := exec.Command("go", "build", "-o", "bench", ".")
	build.Dir = dir
	build.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=-mod=mod", "GOTOOLCHAIN=local", "GOPROXY=off", "CGO_ENABLED=0")
	if out, err := build.CombinedOutput(); err != nil {
		b.Fatalf("go build: %v\n%s", err, out)
	}
	buildTime := time.Since(start)

	run := exec.Command("./bench")
	run.Dir = dir
	out, err := run.CombinedOutput()
	if err != nil {
		b.Fatalf("bench driver: %v\n%s", err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	interp, err := driverLine(lines[0])
	if err != nil || interp.name != "interpreter" {
		b.Fatalf("bench driver printed %q", lines[0])
	}
	b.Logf("%d trees, %d nodes, max depth %d, %.1f splits visited per row; emitted packages built in %v; load %s; %s, best and median of %d passes",
		len(f.Trees), p.NumNodes(), p.MaxDepth(), perRow, buildTime.Round(time.Millisecond), loadAverage(), clockName, 25)
	b.Logf("%-12s %21s %21s %21s", "", "ns/row", "ns/split", "×interpreter")
	b.Logf("%-12s %10s %10s %10s %10s %10s %10s", "(medians)", "Predict", "Batch", "Predict", "Batch", "Predict", "Batch")
	b.Logf("%-12s %10.0f %10s %10.2f", "interpreter", interp.median, "", interp.median/perRow)
	b.ReportMetric(interp.median, "interp-ns/row")
	got := map[string]contender{}
	for _, line := range lines[1:] {
		c, err := driverLine(line)
		if err != nil {
			b.Fatalf("bench driver printed %q", line)
		}
		got[c.name] = c
		b.ReportMetric(c.median, c.name+"-ns/row")
		b.ReportMetric(c.best, c.name+"-best-ns/row")
	}
	for _, l := range layouts {
		one, batch := got[l], got[l+"-batch"]
		b.Logf("%-12s %10.0f %10.0f %10.2f %10.2f %9.2fx %9.2fx", l, one.median, batch.median, one.median/perRow, batch.median/perRow,
			interp.median/one.median, interp.median/batch.median)
	}
}

// contender is one line of the driver's output: a name, then the best and
// the median ns per row over the timed passes.
type contender struct {
	name         string
	best, median float64
}

func driverLine(line string) (contender, error) {
	fs := strings.Fields(line)
	if len(fs) != 3 {
		return contender{}, fmt.Errorf("%d fields", len(fs))
	}
	c := contender{name: fs[0]}
	var err error
	if c.best, err = strconv.ParseFloat(fs[1], 64); err != nil {
		return c, err
	}
	c.median, err = strconv.ParseFloat(fs[2], 64)
	return c, err
}

// loadAverage is the first field of /proc/loadavg, or "unknown".
func loadAverage() string {
	b, err := os.ReadFile("/proc/loadavg")
	if fs := strings.Fields(string(b)); err == nil && len(fs) > 0 {
		return fs[0]
	}
	return "unknown"
}

func writeFloats(b *testing.B, path string, v []float64) {
	buf := make([]byte, 0, 8*len(v))
	for _, x := range v {
		buf = binary.LittleEndian.AppendUint64(buf, math.Float64bits(x))
	}
	if err := os.WriteFile(path, buf, 0o644); err != nil {
		b.Fatal(err)
	}
}

func median(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	return s[len(s)/2]
}

// benchDriver is the main of the benchmark module.
func benchDriver(layouts []string, nf, k int) string {
	var b bytes.Buffer
	fmt.Fprintf(&b, `package main

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"runtime"
	"slices"
THREADIMPORTS
	"github.com/sawmill-dev/sawmill/forest"
`)
	for _, l := range layouts {
		fmt.Fprintf(&b, "\t%q\n", "bench/"+l)
	}
	fmt.Fprintf(&b, `)

func floats(path string) []float64 {
	b, err := os.ReadFile(path)
	if err != nil {
		panic(err)
	}
	v := make([]float64, len(b)/8)
	for i := range v {
		v[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return v
}

type batcher struct {
	name  string
	batch func([][]float64, []float64) error
}

type scorer struct {
	name    string
	predict func(*[%[1]d]float64) [%[2]d]float64
}

THREADCLOCK
// reps is the number of timed passes over the rows per contender.
const reps = 25

func main() {
	runtime.LockOSThread()
	flat, want := floats("rows.bin"), floats("want.bin")
	rows := make([][%[1]d]float64, len(flat)/%[1]d)
	for r := range rows {
		copy(rows[r][:], flat[r*%[1]d:])
	}
	f, err := forest.ReadFile("model.json")
	if err != nil {
		panic(err)
	}
	out := make([]float64, %[2]d)
	scorers := []scorer{
		{"interpreter", func(x *[%[1]d]float64) [%[2]d]float64 {
			f.Predict(x[:], out)
			return [%[2]d]float64(out)
		}},
`, nf, k)
	for _, l := range layouts {
		fmt.Fprintf(&b, "\t\t{%q, %s.Predict},\n", l, l)
	}
	fmt.Fprintf(&b, `	}
	batches := []batcher{
`)
	for _, l := range layouts {
		fmt.Fprintf(&b, "\t\t{%q, %s.PredictBatch},\n", l+"-batch", l)
	}
	fmt.Fprintf(&b, `	}
	for _, s := range scorers {
		for r := range rows {
			out := s.predict(&rows[r])
			for j, v := range out {
				if math.Float64bits(v) != math.Float64bits(want[r*%[1]d+j]) {
					fmt.Fprintf(os.Stderr, "%%s: row %%d output %%d: %%v, interpreter %%v\n", s.name, r, j, v, want[r*%[1]d+j])
					os.Exit(1)
				}
			}
		}
	}
	rowSlices := make([][]float64, len(rows))
	for r := range rows {
		rowSlices[r] = rows[r][:]
	}
	got := make([]float64, len(want))
	for _, s := range batches {
		if err := s.batch(rowSlices, got); err != nil {
			panic(err)
		}
		for i, v := range got {
			if math.Float64bits(v) != math.Float64bits(want[i]) {
				fmt.Fprintf(os.Stderr, "%%s: row %%d output %%d: %%v, interpreter %%v\n", s.name, i/%[1]d, i%%%[1]d, v, want[i])
				os.Exit(1)
			}
		}
	}
	times := make([][]float64, len(scorers)+len(batches))
	sink := 0.0
	for rep := 0; rep < reps; rep++ {
		for i, s := range scorers {
			start := now()
			for r := range rows {
				sink += s.predict(&rows[r])[0]
			}
			times[i] = append(times[i], float64(now()-start)/float64(len(rows)))
		}
		for i, s := range batches {
			start := now()
			if err := s.batch(rowSlices, got); err != nil {
				panic(err)
			}
			times[len(scorers)+i] = append(times[len(scorers)+i], float64(now()-start)/float64(len(rows)))
		}
	}
	for i := range times {
		name := ""
		if i < len(scorers) {
			name = scorers[i].name
		} else {
			name = batches[i-len(scorers)].name
		}
		sortFloats(times[i])
		fmt.Println(name, times[i][0], times[i][len(times[i])/2])
	}
	if sink == 12345.678 {
		fmt.Println(sink)
	}
}

func sortFloats(v []float64) { slices.Sort(v) }
`, k)
	return strings.NewReplacer("THREADIMPORTS", threadClockImports, "THREADCLOCK", threadClock).Replace(b.String())
}

func forestJSON(f *forest.Forest) ([]byte, error) {
	var b bytes.Buffer
	err := f.Encode(&b)
	return b.Bytes(), err
}

// benchTable is the benchmarks' training data, 20,000 rows of the invented
// table of bench/train/synth with two classes, and 20,000 fresh rows of
// the same table to score.
func benchTable() (*train.Data, []float64) {
	x, y := synth.Table(20000, 1)
	yf := make([]float64, len(y))
	for i, v := range y {
		yf[i] = float64(v)
	}
	rows, _ := synth.Table(20000, 2)
	return &train.Data{Features: synth.Names(), X: x, Task: forest.Classification, Classes: []string{"a", "b"}, Y: yf, Label: "label"}, rows
}
