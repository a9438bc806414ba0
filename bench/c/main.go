// Command c-bench times emitted C against emitted Go and the interpreter on
// one forest and one row file, side by side, and prints rows per second,
// nanoseconds per row and per split node visited, build times, and the
// ratios. Every side's checksum (the sum over rows of the last output) must
// equal the interpreter's bit for bit (float C: to float precision). run.sh
// drives it next to scikit-learn.
//
//	go run ./bench/c -model MODEL.json -rows ROWS.csv [-rounds 3] [-reps 7]
//	                 [-sklearn SECONDS]
//
// One thread everywhere, except the C sides named -2threads (two threads
// over halves of the rows, to set beside scikit-learn's n_jobs=2; their
// ns/row and ns/node are per thread); each side runs in its own process, the sides take
// turns, and each figure is the median over rounds of each round's median
// pass. Treat differences under about 1.3x as noise on a busy machine.
package main

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

func main() {
	model := flag.String("model", "", "forest file")
	rowsPath := flag.String("rows", "", "CSV rows (columns named like the features)")
	rounds := flag.Int("rounds", 3, "rounds; the sides take turns in each")
	reps := flag.Int("reps", 7, "passes over the rows per side per round")
	sk := flag.Float64("sklearn", 0, "scikit-learn's predict_proba seconds for the same rows, to print the ratio")
	noGo := flag.Bool("no-go", false, "skip emitted Go")
	cLayouts := flag.String("c", "nested,table,table-batch,table-float,table-2threads", "C sides: comma-separated layouts, -float for float C, -batch to score through model_predict_batch, -2threads for two threads")
	goLayouts := flag.String("go", "nested,table,branchless", "emitted Go layouts")
	sizes := flag.Bool("sizes", false, "print the table sizes of each layout and the Cortex-M4 object sizes, then stop")
	intLeaves := flag.Int("int-leaves", 0, "with -sizes, also the sizes with leaves as scaled integers of 16 or 32 bits (compile --int-leaves)")
	pack := flag.Bool("pack", false, "with -sizes, also the sizes with packed bits (compile --pack)")
	flag.Parse()
	if *sizes {
		if err := printSizes(*model, *intLeaves, *pack); err != nil {
			fmt.Fprintln(os.Stderr, "c-bench:", err)
			os.Exit(1)
		}
		return
	}
	if err := run(*model, *rowsPath, *rounds, *reps, *sk, *noGo, split(*cLayouts), split(*goLayouts)); err != nil {
		fmt.Fprintln(os.Stderr, "c-bench:", err)
		os.Exit(1)
	}
}

// side is one program under test.
type side struct {
	name    string
	build   time.Duration
	cmd     []string // run with the rows file appended
	times   []float64
	float   bool
	threads int
	sum     string // checksum printed
	exactOf float64
}

func split(s string) []string {
	if s == "" {
		return nil
	}
	return strings.Split(s, ",")
}

func run(modelPath, rowsPath string, rounds, reps int, sklearnSecs float64, noGo bool, cLayouts, goLayouts []string) error {
	f, err := forest.ReadFile(modelPath)
	if err != nil {
		return err
	}
	rows, err := forest.ReadRowsFile(rowsPath, f.Features, forest.RowOptions{})
	if err != nil {
		return err
	}
	dir, err := os.MkdirTemp("", "sawmill-cbench")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	bin := filepath.Join(dir, "rows.bin")
	var b bytes.Buffer
	binary.Write(&b, binary.LittleEndian, rows.Values)
	if err := os.WriteFile(bin, b.Bytes(), 0o644); err != nil {
		return err
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		return err
	}
	ps, _, err := compile.Compile(f, compile.Options{SingleInputs: true})
	if err != nil {
		return err
	}
	n, k := rows.Len(), f.NumOutputs()
	visited, ref := 0, 0.0
	out := make([]float64, k)
	for i := 0; i < n; i++ {
		x := rows.Row(i)
		for ti := range f.Trees {
			visited += depthOf(f, &f.Trees[ti], x)
		}
		f.Predict(x, out)
		ref += out[k-1]
	}
	perRow := float64(visited) / float64(n)
	fmt.Printf("model %s: %d trees, %d nodes, depth %d; %d rows of %d features; %.1f splits visited per row\n",
		filepath.Base(modelPath), len(f.Trees), p.NumNodes(), p.MaxDepth(), n, len(f.Features), perRow)
	fmt.Printf("interpreter checksum %.17g\n", ref)

	var sides []*side
	for _, l := range cLayouts {
		prog, fl, threads, batch := p, false, 1, false
		for more := true; more; { // the suffixes in any order
			switch {
			case strings.HasSuffix(l, "-2threads"):
				threads, l = 2, strings.TrimSuffix(l, "-2threads")
			case strings.HasSuffix(l, "-float"):
				prog, fl, l = ps, true, strings.TrimSuffix(l, "-float")
			case strings.HasSuffix(l, "-batch"):
				batch, l = true, strings.TrimSuffix(l, "-batch")
			default:
				more = false
			}
		}
		s, err := buildC(dir, prog, l, fl, threads, batch, n, reps)
		if err != nil {
			return err
		}
		sides = append(sides, s)
	}
	nC := len(sides)
	if !noGo {
		for _, l := range goLayouts {
			s, err := buildGo(dir, p, l, n, reps)
			if err != nil {
				fmt.Printf("go/%s: not built: %v\n", l, firstLine(err.Error()))
				continue
			}
			sides = append(sides, s)
		}
	}
	interp := &side{name: "interpreter (forest.Predict, in process)"}
	for r := 0; r < rounds; r++ {
		for _, s := range sides {
			cmd := exec.Command(s.cmd[0], append(s.cmd[1:], bin)...)
			outb, err := cmd.Output()
			if err != nil {
				return fmt.Errorf("%s: %v", s.name, err)
			}
			secs, sum, err := parseRun(string(outb))
			if err != nil {
				return fmt.Errorf("%s: %v", s.name, err)
			}
			s.times = append(s.times, secs)
			s.sum = sum
		}
		var ts []float64
		for rep := 0; rep < reps; rep++ {
			t0 := time.Now()
			for i := 0; i < n; i++ {
				f.Predict(rows.Row(i), out)
			}
			ts = append(ts, time.Since(t0).Seconds())
		}
		interp.times = append(interp.times, median(ts))
	}
	sides = append(sides, interp)
	refs := strconv.FormatFloat(ref, 'g', 17, 64)
	fmt.Printf("\n%-44s %9s %10s %11s %9s %9s  %s\n", "side", "build s", "s/pass", "rows/s", "ns/row", "ns/node", "checksum")
	base := sides[0]
	for _, s := range sides {
		t := median(s.times)
		check := "= interpreter"
		if s.sum != "" && s.sum != refs {
			v, _ := strconv.ParseFloat(s.sum, 64)
			if !s.float || math.Abs(v-ref) > 1e-3*math.Abs(ref)+1e-3 {
				return fmt.Errorf("%s: checksum %s, interpreter %s", s.name, s.sum, refs)
			}
			check = fmt.Sprintf("%s (float; interpreter %s)", s.sum, refs)
		}
		build := "-"
		if s.build > 0 {
			build = fmt.Sprintf("%.2f", s.build.Seconds())
		}
		cpu := t * float64(max(s.threads, 1)) // ns per row and node are per thread
		fmt.Printf("%-44s %9s %10.4f %11.0f %9.0f %9.2f  %s\n", s.name, build, t, float64(n)/t, cpu/float64(n)*1e9, cpu/float64(n)/perRow*1e9, check)
	}
	fmt.Println()
	for _, s := range sides[1:] {
		fmt.Printf("time of %-44s / %s: %.2f\n", s.name, base.name, median(s.times)/median(base.times))
	}
	if sklearnSecs > 0 {
		for _, s := range sides[:nC] {
			fmt.Printf("scikit-learn predict_proba (2 threads) %.4f s / %s %.4f s: %.1fx\n", sklearnSecs, s.name, median(s.times), sklearnSecs/median(s.times))
		}
	}
	return nil
}

// printSizes prints, for double and float C (and with intLeaves double C
// with integer leaves), each layout's tables and, when arm-none-eabi-gcc is
// on PATH, the object's sections for a Cortex-M4; with pack also double and
// float C with packed bits.
func printSizes(modelPath string, intLeaves int, pack bool) error {
	f, err := forest.ReadFile(modelPath)
	if err != nil {
		return err
	}
	builds := []ctarget.Options{{}, {Float: true}}
	if intLeaves != 0 {
		builds = append(builds, ctarget.Options{IntLeaves: intLeaves}, ctarget.Options{IntLeaves: intLeaves, Float: true})
	}
	if pack {
		builds = append(builds, ctarget.Options{Pack: true}, ctarget.Options{Pack: true, Float: true})
	}
	for _, o := range builds {
		fl := o.Float
		p, _, err := compile.Compile(f, compile.Options{SingleInputs: fl})
		if err != nil {
			return err
		}
		sizes, err := verify.MeasureBoth(context.Background(), p, o)
		if errors.Is(err, verify.ErrNoARM) {
			fmt.Println("arm-none-eabi-gcc is not on PATH: tables only")
			sizes, err = verify.CSizes(p, o)
		}
		if err != nil {
			return err
		}
		ft := map[bool]string{false: "double", true: "float"}[fl]
		if o.IntLeaves != 0 {
			ft += fmt.Sprintf(", int%d leaves", o.IntLeaves)
		}
		if o.Pack {
			ft += ", packed"
		}
		fmt.Printf("%s: %d trees, %d nodes (%d leaves), depth %d\n", ft, len(p.Trees), p.NumNodes(), p.NumLeaves(), p.MaxDepth())
		for _, s := range sizes {
			fmt.Printf("  %s/%s: tables %d bytes, %.2f bytes per node\n", s.Layout, ft, s.TableBytes, s.BytesPerNode())
			for _, t := range s.Tables {
				fmt.Printf("    %-20s %8d x %d = %9d\n", t.Name, t.Len, t.ElemBytes, t.Bytes())
			}
			if s.ARM != nil {
				fmt.Printf("    %s %s: .text %d + .rodata %d = %d bytes (%.1f KiB; .data+.bss %d)\n", verify.ARMCompiler, s.ARM.Flags,
					s.ARM.Text, s.ARM.Rodata, s.ARM.Text+s.ARM.Rodata, float64(s.ARM.Text+s.ARM.Rodata)/1024, s.ARM.Data)
			}
			if s.M0 != nil {
				fmt.Printf("    %s %s: .text %d + .rodata %d = %d bytes (%.1f KiB)\n", verify.ARMCompiler, s.M0.Flags,
					s.M0.Text, s.M0.Rodata, s.M0.Flash(), float64(s.M0.Flash())/1024)
			}
		}
	}
	return nil
}

// depthOf counts the splits row x passes in tree t (the interpreter's walk).
func depthOf(f *forest.Forest, t *forest.Tree, x []float64) int {
	d, i := 0, 0
	for !t.IsLeaf(i) {
		v := x[t.Feature[i]]
		if f.InputPrecision == forest.Float32 {
			v = forest.Round32(v)
		}
		switch {
		case v != v:
			if t.MissingLeft[i] {
				i = t.Left[i]
			} else {
				i = t.Right[i]
			}
		case v <= t.Threshold[i]:
			i = t.Left[i]
		default:
			i = t.Right[i]
		}
		d++
	}
	return d
}

func median(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	return s[len(s)/2]
}

func parseRun(out string) (float64, string, error) {
	var secs float64
	var sum string
	for _, l := range strings.Split(out, "\n") {
		f := strings.Fields(l)
		if len(f) != 2 {
			continue
		}
		switch f[0] {
		case "seconds":
			v, err := strconv.ParseFloat(f[1], 64)
			if err != nil {
				return 0, "", err
			}
			secs = v
		case "checksum":
			v, err := strconv.ParseFloat(f[1], 64)
			if err != nil {
				return 0, "", err
			}
			sum = strconv.FormatFloat(v, 'g', 17, 64)
		}
	}
	if secs == 0 || sum == "" {
		return 0, "", fmt.Errorf("unexpected output %q", out)
	}
	return secs, sum, nil
}

func firstLine(s string) string {
	if i := strings.IndexByte(s, '\n'); i >= 0 {
		return s[:i]
	}
	return s
}

// cBench is the C driver: it loads the rows (float64, little-endian),
// narrows them to the API's type beforehand, and times reps passes.
const cBench = `#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
#include "model.h"

static double now(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static int cmp(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return (x > y) - (x < y);
}

struct part {
	const struct part *base; /* parts[0], to tell the thread's own output buffer */
	const FT *rows;
	double *last; /* the last output of each row */
	long from, to;
};

static void *score(void *arg)
{
	struct part *p = arg;
	long r;
#if BATCH
	/* model_predict_batch: tree by tree over the thread's rows */
	static FT outs[THREADS][(NROWS / THREADS + 1) * MODEL_NUM_OUTPUTS];
	FT *o = outs[p - p->base];
	model_predict_batch(p->rows + p->from * MODEL_NUM_FEATURES, (size_t)(p->to - p->from), o);
	for (r = p->from; r < p->to; r++) {
		p->last[r] = (double)o[(r - p->from) * MODEL_NUM_OUTPUTS + MODEL_NUM_OUTPUTS - 1];
	}
#else
	FT out[MODEL_NUM_OUTPUTS];
	for (r = p->from; r < p->to; r++) {
		model_predict(p->rows + r * MODEL_NUM_FEATURES, out);
		p->last[r] = (double)out[MODEL_NUM_OUTPUTS - 1];
	}
#endif
	return NULL;
}

int main(int argc, char **argv)
{
	FILE *in = fopen(argv[1], "rb");
	long n = NROWS, r;
	int rep, k;
	double *raw = malloc(sizeof(double) * (size_t)n * MODEL_NUM_FEATURES);
	FT *rows = malloc(sizeof(FT) * (size_t)n * MODEL_NUM_FEATURES);
	double *last = malloc(sizeof(double) * (size_t)n);
	double times[REPS], sum = 0;
	struct part parts[THREADS];
	pthread_t th[THREADS];
	if (in == NULL || fread(raw, sizeof(double), (size_t)n * MODEL_NUM_FEATURES, in) != (size_t)n * MODEL_NUM_FEATURES) {
		fprintf(stderr, "cannot read rows\n");
		return 2;
	}
	for (r = 0; r < n * MODEL_NUM_FEATURES; r++) {
		rows[r] = (FT)raw[r];
	}
	for (rep = 0; rep < REPS; rep++) {
		double t0 = now();
		for (k = 0; k < THREADS; k++) {
			parts[k].base = parts;
			parts[k].rows = rows;
			parts[k].last = last;
			parts[k].from = n * k / THREADS;
			parts[k].to = n * (k + 1) / THREADS;
			if (THREADS == 1) {
				score(&parts[k]);
			} else {
				pthread_create(&th[k], NULL, score, &parts[k]);
			}
		}
		for (k = 0; k < THREADS; k++) {
			if (THREADS > 1) {
				pthread_join(th[k], NULL);
			}
		}
		times[rep] = now() - t0;
		sum = 0;
		for (r = 0; r < n; r++) {
			sum += last[r]; /* in row order, as the interpreter's checksum */
		}
	}
	qsort(times, REPS, sizeof(double), cmp);
	printf("seconds %.6f\nchecksum %.17g\n", times[REPS / 2], sum);
	return 0;
}
`

func buildC(dir string, p *compile.Program, layout string, float bool, threads int, batch bool, n, reps int) (*side, error) {
	ft := "double"
	if float {
		ft = "float"
	}
	sub := filepath.Join(dir, fmt.Sprintf("c-%s-%s-%d-%v", layout, ft, threads, batch))
	if err := os.Mkdir(sub, 0o755); err != nil {
		return nil, err
	}
	files, err := ctarget.Emit(p, ctarget.Options{Layout: layout, Float: float})
	if err != nil {
		return nil, err
	}
	for _, f := range files {
		if err := os.WriteFile(filepath.Join(sub, f.Name), f.Data, 0o644); err != nil {
			return nil, err
		}
	}
	if err := os.WriteFile(filepath.Join(sub, "bench.c"), []byte(cBench), 0o644); err != nil {
		return nil, err
	}
	t0 := time.Now()
	cmd := exec.Command("gcc", "-std=c99", "-O2", "-c", "model.c")
	cmd.Dir = sub
	if out, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("gcc model.c: %v\n%s", err, out)
	}
	build := time.Since(t0)
	cmd = exec.Command("gcc", "-std=gnu99", "-O2", "-DFT="+ft, fmt.Sprintf("-DNROWS=%d", n), fmt.Sprintf("-DREPS=%d", reps),
		fmt.Sprintf("-DTHREADS=%d", threads), fmt.Sprintf("-DBATCH=%d", map[bool]int{true: 1}[batch]), "-pthread", "-o", "bench", "bench.c", "model.o", "-lm")
	cmd.Dir = sub
	if out, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("gcc bench.c: %v\n%s", err, out)
	}
	how := "gcc -O2"
	if batch {
		how += ", predict_batch"
	}
	if threads > 1 {
		how += fmt.Sprintf(", %d threads", threads)
	}
	name := fmt.Sprintf("c/%s (%s, %s)", layout, ft, how)
	return &side{name: name, threads: threads, build: build, cmd: []string{filepath.Join(sub, "bench")}, float: float}, nil
}

const goBench = `package main

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"slices"
	"time"

	"bench/model"
)

func main() {
	b, err := os.ReadFile(os.Args[1])
	if err != nil {
		panic(err)
	}
	rows := make([]float64, len(b)/8)
	for i := range rows {
		rows[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	n := len(rows) / model.NumFeatures
	var times []float64
	sum := 0.0
	for rep := 0; rep < REPS; rep++ {
		t0 := time.Now()
		sum = 0
		for r := 0; r < n; r++ {
			out := model.Predict((*[model.NumFeatures]float64)(rows[r*model.NumFeatures:]))
			sum += out[model.NumOutputs-1]
		}
		times = append(times, time.Since(t0).Seconds())
	}
	slices.Sort(times)
	fmt.Printf("seconds %.6f\nchecksum %.17g\n", times[len(times)/2], sum)
}
`

func buildGo(dir string, p *compile.Program, layout string, n, reps int) (*side, error) {
	sub := filepath.Join(dir, "go-"+layout)
	if err := os.MkdirAll(filepath.Join(sub, "model"), 0o755); err != nil {
		return nil, err
	}
	files, err := gotarget.Emit(p, gotarget.Options{Layout: layout, NoTest: true})
	if err != nil {
		return nil, err
	}
	for _, f := range files {
		if err := os.WriteFile(filepath.Join(sub, "model", f.Name), f.Data, 0o644); err != nil {
			return nil, err
		}
	}
	if err := os.WriteFile(filepath.Join(sub, "go.mod"), []byte("module bench\n\ngo 1.21\n"), 0o644); err != nil {
		return nil, err
	}
	src := strings.Replace(goBench, "REPS", strconv.Itoa(reps), 1)
	if err := os.WriteFile(filepath.Join(sub, "main.go"), []byte(src), 0o644); err != nil {
		return nil, err
	}
	t0 := time.Now()
	cmd := exec.Command("go", "build", "-o", "bench", ".")
	cmd.Dir = sub
	cmd.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=", "GOPROXY=off", "CGO_ENABLED=0")
	if out, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("go build: %v\n%s", err, out)
	}
	return &side{name: fmt.Sprintf("go/%s (emitted Go)", layout), build: time.Since(t0), cmd: []string{filepath.Join(sub, "bench")}}, nil
}
