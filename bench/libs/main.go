// Command libs-bench is sawmill's side of bench/libs: it imports the models
// libs.py trained (through source, as `sawmill import` does), checks the
// interpreter against each library's own predictions, emits C and Go,
// builds them, checks every output of the emitted code against the
// interpreter bit for bit, times NAME_predict_batch /
// NAME_predict_batch_threads and PredictBatchWorkers on the same rows in
// the same batches and thread counts as libs.py, and prints one table with
// the ratios. run.sh drives both sides.
//
//	go run ./bench/libs -dir DIR -libs LIBS.txt [-models xgb,lgbm,rf,rfbig]
//	       [-batches 1,100,10000] [-threads 1,2] [-reps 5] [-single-rows 1000]
//	       [-c auto,table,block,perfect,perfect+avx512] [-callgrind 0]
//
// DIR holds what libs.py wrote (rows.bin, MODEL.model, MODEL.LIB.pred);
// LIBS.txt is libs.py's output (its "time" lines).
package main

import (
	"bufio"
	"encoding/binary"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/source"
)

func main() {
	c := config{libPaths: map[string]*string{"xgb": new(string), "lgbm": new(string)}}
	flag.StringVar(&c.dir, "dir", "", "folder libs.py wrote")
	flag.StringVar(&c.libs, "libs", "", "libs.py's output")
	models := flag.String("models", "xgb,lgbm,rf,rfbig", "models to run")
	batches := flag.String("batches", "1,100,10000", "rows per call")
	threads := flag.String("threads", "1,2", "thread counts")
	cLayouts := flag.String("c", "auto,table", "C layouts (auto is resolved; a layout is built once; LAYOUT+avx2 is also built with -mavx2, LAYOUT+avx512 with -march=x86-64-v4)")
	flag.IntVar(&c.reps, "reps", 5, "passes per figure; the best is kept")
	flag.IntVar(&c.singleRows, "single-rows", 1000, "rows scored at batch 1")
	flag.StringVar(c.libPaths["xgb"], "xgboost-lib", "", "libxgboost.so of the XGBoost wheel, for the single-row latency (empty: not measured)")
	flag.StringVar(c.libPaths["lgbm"], "lightgbm-lib", "", "lib_lightgbm.so of the LightGBM wheel, for the single-row latency (empty: not measured)")
	flag.IntVar(&c.latencyRows, "latency-rows", 2000, "rows timed one call each for the single-row latency")
	flag.StringVar(&c.work, "work", "", "folder to build the sides in and keep (empty: a temporary folder, removed at the end)")
	flag.IntVar(&c.callgrind, "callgrind", 0, "when > 0, also count instructions per row of each C layout under valgrind --tool=callgrind over this many rows")
	flag.Parse()
	var err error
	c.models, c.cLayouts = split(*models), split(*cLayouts)
	if c.batches, err = ints(*batches); err == nil {
		c.threads, err = ints(*threads)
	}
	if err == nil {
		err = run(c)
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "libs-bench:", err)
		os.Exit(1)
	}
}

// config is the command line.
type config struct {
	dir, libs        string
	work             string // where the sides are built; kept when given
	models, cLayouts []string
	batches, threads []int
	reps, singleRows int
	callgrind        int
	// libPaths are the libraries' shared objects, by model.
	libPaths    map[string]*string
	latencyRows int
}

// workDir is the folder the sides are built in: dir, made empty where it
// is new (an existing one must be empty, so no one's files are mixed with
// ours), or a new temporary folder.
func workDir(dir string) (string, error) {
	if dir == "" {
		return os.MkdirTemp("", "sawmill-libs")
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", err
	}
	if ents, err := os.ReadDir(dir); err != nil {
		return "", err
	} else if len(ents) > 0 {
		return "", fmt.Errorf("-work %s: the folder is not empty", dir)
	}
	return dir, nil
}

// key names one figure: a model, a side, a thread count and a batch.
type key struct {
	model, side    string
	threads, batch int
}

func run(c config) error {
	libTimes, versions, err := readLibTimes(c.libs)
	if err != nil {
		return err
	}
	x, err := readRows(filepath.Join(c.dir, "rows.bin"))
	if err != nil {
		return err
	}
	work, err := workDir(c.work)
	if err != nil {
		return err
	}
	if c.work == "" {
		defer os.RemoveAll(work)
	}
	floor, err := branchFloor(work)
	if err != nil {
		return err
	}
	fmt.Println(versions)
	fmt.Printf("branch floor of this machine: %.2f ns per unpredictable branch, %.2f ns per predictable one (gcc -O2 loop over random bits)\n", floor[0], floor[1])
	times := map[key]float64{}
	for k, v := range libTimes {
		times[k] = v
	}
	for _, m := range c.models {
		r, err := benchModel(c, m, x, work, times)
		if err != nil {
			return fmt.Errorf("%s: %w", m, err)
		}
		printModel(c, r, times, floor[0]) // as each model ends: a long run shows its first tables early
	}
	fmt.Println("\nns/row at 2 threads is wall time per row (both threads working); sawmill ns/tree/row is per thread")
	fmt.Println("(wall ns/row x threads / trees). Ratios come from one run, both sides on this machine.")
	return nil
}

// modelReport is what one model's run established beyond its times.
type modelReport struct {
	name         string
	trees, nodes int
	sides        []string // sawmill's sides, in order
	checks       []string // one line per check against a library
	instrPerRow  map[string]float64
	latency      []string
	// bound is C's documented error bound; differ counts C's outputs
	// that are not the interpreter's bits, of rows.
	bound        float64
	differ, rows int
}

// benchModel imports model m, checks it, and times sawmill's sides on it.
func benchModel(c config, m string, x []float64, work string, times map[key]float64) (*modelReport, error) {
	res, err := source.Load(filepath.Join(c.dir, m+".model"), "", source.Options{})
	if err != nil {
		return nil, err
	}
	f := res.Forest
	nf := len(f.Features)
	if len(x)%nf != 0 {
		return nil, fmt.Errorf("rows.bin holds %d values, not rows of %d features", len(x), nf)
	}
	n := len(x) / nf
	ref := interpret(f, x, n)
	rep := &modelReport{name: m, trees: len(f.Trees), instrPerRow: map[string]float64{}}
	for _, lib := range []string{"xgboost", "lightgbm", "sklearn", "onnx"} {
		line, err := checkLibrary(c.dir, m, lib, ref)
		if err != nil {
			return nil, err
		}
		if line != "" {
			rep.checks = append(rep.checks, line)
		}
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		return nil, err
	}
	rep.nodes = p.NumNodes()
	dir := filepath.Join(work, m)
	if err := os.Mkdir(dir, 0o755); err != nil {
		return nil, err
	}
	rowsPath := filepath.Join(c.dir, "rows.bin")
	sides, err := buildSides(c, p, dir)
	if err != nil {
		return nil, err
	}
	for _, s := range sides {
		got, err := s.run(c, rowsPath, n, p.NumOutputs)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", s.name, err)
		}
		if err := sameBits(got.last, ref, s.bound); err != nil {
			return nil, fmt.Errorf("%s: %w", s.name, err)
		}
		for k, v := range got.times {
			times[key{m, s.name, k[0], k[1]}] = v
		}
		rep.sides = append(rep.sides, s.name)
		rep.bound, rep.rows = max(rep.bound, s.bound), n
		rep.differ = max(rep.differ, countDiffer(got.last, ref))
		if s == sides[0] && c.libPaths[m] != nil {
			rep.latency, err = latency(m, filepath.Join(c.dir, m+".model"), rowsPath, filepath.Dir(s.bin), *c.libPaths[m], min(c.latencyRows, n))
			if err != nil {
				return nil, fmt.Errorf("latency: %w", err)
			}
		}
		if c.callgrind > 0 && s.c && !strings.HasSuffix(s.name, "+avx512") { // valgrind 3.19 cannot run AVX-512 code
			ir, err := s.instructions(rowsPath, c.callgrind)
			if err != nil {
				return nil, fmt.Errorf("%s: callgrind: %w", s.name, err)
			}
			rep.instrPerRow[s.name] = ir
		}
	}
	return rep, nil
}

// interpret is forest.Predict's last output for each row.
func interpret(f *forest.Forest, x []float64, n int) []float64 {
	nf, out := len(f.Features), make([]float64, f.NumOutputs())
	ref := make([]float64, n)
	for r := 0; r < n; r++ {
		f.Predict(x[r*nf:(r+1)*nf], out)
		ref[r] = out[len(out)-1]
	}
	return ref
}

// Tolerances of the check of the interpreter against each library's own
// predictions (the probability of class 1). sawmill's import is exact on
// the raw margins (source package; scripts/*_live_check.py); what may
// differ is the last step: XGBoost returns float32 (its sigmoid in float,
// from the XGBoost 3.2.0 source as remembered), LightGBM and scikit-learn
// float64, and ONNX Runtime sums in float32 in its own order, so ONNX is
// reported, not required.
var tolerance = map[string]float64{"xgboost": 4e-7, "lightgbm": 1e-12, "sklearn": 1e-12}

// checkLibrary compares ref with DIR/MODEL.LIB.pred when it exists: "" when
// it does not, an error when the largest difference passes the library's
// tolerance.
func checkLibrary(dir, m, lib string, ref []float64) (string, error) {
	pred, err := readRows(filepath.Join(dir, m+"."+lib+".pred"))
	if errors.Is(err, os.ErrNotExist) {
		return "", nil
	}
	if err != nil {
		return "", err
	}
	if len(pred) != len(ref) {
		return "", fmt.Errorf("%s: %d predictions for %d rows", lib, len(pred), len(ref))
	}
	worst, at := 0.0, 0
	for i := range ref {
		if d := math.Abs(pred[i] - ref[i]); d > worst || d != d {
			worst, at = d, i
		}
	}
	line := fmt.Sprintf("interpreter vs %s: largest difference %.3g (row %d)", lib, worst, at)
	tol, required := tolerance[lib]
	if !required {
		return line + " (reported only)", nil
	}
	if !(worst <= tol) {
		return "", fmt.Errorf("%s, above the tolerance %.3g: the figures would not count", line, tol)
	}
	return fmt.Sprintf("%s, within %.3g", line, tol), nil
}

// sameBits requires got to equal want bit for bit, or within bound where
// that is not 0 (emitted C's transforms call the C library's exp, which
// ctarget.ErrorBound bounds).
func sameBits(got, want []float64, bound float64) error {
	if len(got) != len(want) {
		return fmt.Errorf("%d outputs, want %d", len(got), len(want))
	}
	for i := range want {
		same := math.Float64bits(got[i]) == math.Float64bits(want[i])
		if !same && !(bound > 0 && math.Abs(got[i]-want[i]) <= bound) {
			return fmt.Errorf("row %d: %v, the interpreter %v (bound %g)", i, got[i], want[i], bound)
		}
	}
	return nil
}

// countDiffer counts the values of got whose bits are not want's.
func countDiffer(got, want []float64) int {
	n := 0
	for i := range want {
		if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
			n++
		}
	}
	return n
}

// readRows reads float64 little-endian values.
func readRows(path string) ([]float64, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	if len(b)%8 != 0 {
		return nil, fmt.Errorf("%s: %d bytes, not float64 values", path, len(b))
	}
	v := make([]float64, len(b)/8)
	for i := range v {
		v[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	return v, nil
}

// readLibTimes reads libs.py's "time MODEL LIB THREADS BATCH NS" lines and
// its "versions" line.
func readLibTimes(path string) (map[key]float64, string, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, "", err
	}
	defer fh.Close()
	out, versions := map[key]float64{}, ""
	sc := bufio.NewScanner(fh)
	for line := 1; sc.Scan(); line++ {
		f := strings.Fields(sc.Text())
		if len(f) > 0 && f[0] == "versions" {
			versions = sc.Text()
		}
		if len(f) != 6 || f[0] != "time" {
			continue
		}
		t, err1 := strconv.Atoi(f[3])
		b, err2 := strconv.Atoi(f[4])
		ns, err3 := strconv.ParseFloat(f[5], 64)
		if err := errors.Join(err1, err2, err3); err != nil {
			return nil, "", fmt.Errorf("%s:%d: %v", path, line, err)
		}
		out[key{f[1], f[2], t, b}] = ns
	}
	return out, versions, sc.Err()
}

// printModel prints, per batch and thread count, every side's ns per row
// on model r, and the ratio of the fastest library to the fastest sawmill
// side.
func printModel(c config, r *modelReport, times map[key]float64, floor float64) {
	libs := []string{"xgboost", "lightgbm", "sklearn", "onnx"}
	fmt.Printf("\n%s: %d trees, %d nodes\n", r.name, r.trees, r.nodes)
	for _, l := range r.checks {
		fmt.Println("  " + l)
	}
	fmt.Println("  every output of every sawmill side below = the interpreter's, bit for bit (C: or within")
	fmt.Printf("  ctarget.ErrorBound %.3g, the C library's exp against Go's; %d of %d rows differed)\n", r.bound, r.differ, r.rows)
	var cols []string
	for _, l := range libs {
		if _, ok := times[key{r.name, l, c.threads[0], c.batches[0]}]; ok {
			cols = append(cols, l)
		}
	}
	cols = append(cols, r.sides...)
	fmt.Printf("  %-8s %-7s", "threads", "batch")
	for _, s := range cols {
		fmt.Printf(" %14s", s)
	}
	fmt.Printf(" %14s %14s %12s\n", "best lib/best", "sawmill ns/", "x branch")
	fmt.Printf("  %-8s %-7s", "", "")
	for range cols {
		fmt.Printf(" %14s", "ns/row")
	}
	fmt.Printf(" %14s %14s %12s\n", "sawmill", "tree/row", "floor")
	for _, t := range c.threads {
		for _, b := range c.batches {
			bestLib, bestOurs := math.Inf(1), math.Inf(1)
			fmt.Printf("  %-8d %-7d", t, b)
			for _, s := range cols {
				v, ok := times[key{r.name, s, t, b}]
				if !ok {
					fmt.Printf(" %14s", "-")
					continue
				}
				fmt.Printf(" %14.0f", v)
				if contains(libs, s) {
					bestLib = math.Min(bestLib, v)
				} else {
					bestOurs = math.Min(bestOurs, v)
				}
			}
			perTree := bestOurs * float64(t) / float64(r.trees)
			ratio := "-"
			if !math.IsInf(bestLib, 1) && !math.IsInf(bestOurs, 1) {
				ratio = fmt.Sprintf("%.2fx", bestLib/bestOurs)
			}
			fmt.Printf(" %14s %14.2f %11.1fx\n", ratio, perTree, perTree/floor)
		}
	}
	for _, l := range r.latency {
		fmt.Println("  " + l)
	}
	if len(r.instrPerRow) > 0 {
		names := make([]string, 0, len(r.instrPerRow))
		for s := range r.instrPerRow {
			names = append(names, s)
		}
		sort.Strings(names)
		for _, s := range names {
			fmt.Printf("  callgrind: %s: %.0f instructions per row (%.1f per tree)\n", s, r.instrPerRow[s], r.instrPerRow[s]/float64(r.trees))
		}
	}
}

func contains(s []string, v string) bool {
	for _, x := range s {
		if x == v {
			return true
		}
	}
	return false
}

func split(s string) []string {
	if s == "" {
		return nil
	}
	return strings.Split(s, ",")
}

func ints(s string) ([]int, error) {
	var out []int
	for _, f := range split(s) {
		v, err := strconv.Atoi(f)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, nil
}
