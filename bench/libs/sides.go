package main

import (
	"bufio"
	"bytes"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
)

// side is one of sawmill's builds: a driver binary timing one emitted
// layout.
type side struct {
	name string
	bin  string
	c    bool
	// bound is what an output may differ from the interpreter's by: 0
	// (bit for bit) but for C with a transform (ctarget.ErrorBound).
	bound float64
}

// result is one driver run: ns per row by (threads, batch), and every
// row's last output.
type result struct {
	times map[[2]int]float64
	last  []float64
}

// buildSides emits and builds the C layouts c asks for (auto resolved, each
// layout once) and the Go package auto chooses. A layout written
// LAYOUT+avx2 is built with -mavx2 as well, LAYOUT+avx512 with
// -march=x86-64-v4 (cTargets: the SIMD lanes of block and perfect).
func buildSides(c config, p *compile.Program, dir string) ([]*side, error) {
	var sides []*side
	seen := map[string]bool{}
	for _, l := range c.cLayouts {
		l, target, _ := strings.Cut(l, "+")
		layout, _, err := ctarget.Resolve(p, ctarget.Options{Layout: l})
		if err != nil {
			return nil, err
		}
		flags, ok := cTargets[target]
		if !ok {
			return nil, fmt.Errorf("C layout %q: unknown target +%s (want +avx2 or +avx512)", l+"+"+target, target)
		}
		if target != "" {
			layout += "+" + target
		}
		if seen[layout] {
			continue
		}
		seen[layout] = true
		s, err := buildC(p, layout, dir, flags...)
		if err != nil {
			return nil, err
		}
		sides = append(sides, s)
	}
	s, err := buildGo(p, dir)
	if err != nil {
		return nil, err
	}
	return append(sides, s), nil
}

// cTargets are the build flags of a C layout's "+TARGET" suffix.
var cTargets = map[string][]string{"": nil, "avx2": {"-mavx2"}, "avx512": {"-march=x86-64-v4"}}

// buildC writes model.c, model_threads.c and the driver into a folder of
// their own and builds them with gcc -O2, as a user would, and any flags
// (layout's "+TARGET" suffix is a name only).
func buildC(p *compile.Program, layout, dir string, flags ...string) (*side, error) {
	sub := filepath.Join(dir, "c-"+layout)
	if err := os.Mkdir(sub, 0o755); err != nil {
		return nil, err
	}
	files, err := ctarget.Emit(p, ctarget.Options{Layout: strings.Split(layout, "+")[0], Threads: true})
	if err != nil {
		return nil, err
	}
	files = append(files, emit.File{Name: "bench.c", Data: []byte(cDriver)})
	for _, f := range files {
		if err := os.WriteFile(filepath.Join(sub, f.Name), f.Data, 0o644); err != nil {
			return nil, err
		}
	}
	args := append([]string{"-std=gnu99", "-O2", "-g"}, flags...)
	cmd := exec.Command("gcc", append(args, "-o", "bench", "bench.c", "model.c", "model_threads.c", "-pthread", "-lm")...)
	cmd.Dir = sub
	if out, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("gcc: %v\n%s", err, out)
	}
	return &side{name: "c/" + layout, bin: filepath.Join(sub, "bench"), c: true, bound: ctarget.ErrorBound(p, false)}, nil
}

// buildGo writes the Go package auto chooses and the driver into a module
// of their own and builds it.
func buildGo(p *compile.Program, dir string) (*side, error) {
	layout, _, err := gotarget.Resolve(p, gotarget.Options{})
	if err != nil {
		return nil, err
	}
	sub := filepath.Join(dir, "go")
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
	for _, f := range []struct{ name, data string }{{"go.mod", "module bench\n\ngo 1.21\n"}, {"main.go", goDriver}} {
		if err := os.WriteFile(filepath.Join(sub, f.name), []byte(f.data), 0o644); err != nil {
			return nil, err
		}
	}
	cmd := exec.Command("go", "build", "-o", "bench", ".")
	cmd.Dir = sub
	cmd.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=", "GOPROXY=off", "CGO_ENABLED=0")
	if out, err := cmd.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("go build: %v\n%s", err, out)
	}
	return &side{name: "go/" + layout, bin: filepath.Join(sub, "bench")}, nil
}

// run times the side at every thread count and batch, and reads its
// outputs.
func (s *side) run(c config, rowsPath string, n, k int) (*result, error) {
	outPath := s.bin + ".out"
	cmd := exec.Command(s.bin, rowsPath, strconv.Itoa(n), strconv.Itoa(c.reps), strconv.Itoa(c.singleRows), outPath,
		joinInts(c.threads), joinInts(c.batches))
	out, err := cmd.Output()
	if err != nil {
		return nil, fmt.Errorf("%v: %s", err, stderrOf(err))
	}
	res := &result{times: map[[2]int]float64{}}
	sc := bufio.NewScanner(bytes.NewReader(out))
	for sc.Scan() {
		f := strings.Fields(sc.Text())
		if len(f) != 4 || f[0] != "time" {
			continue
		}
		t, _ := strconv.Atoi(f[1])
		b, _ := strconv.Atoi(f[2])
		ns, err := strconv.ParseFloat(f[3], 64)
		if err != nil {
			return nil, err
		}
		res.times[[2]int{t, b}] = ns
	}
	if res.last, err = readRows(outPath); err != nil {
		return nil, err
	}
	return res, nil
}

// callgrindTotal matches callgrind's summary of instructions executed.
var callgrindTotal = regexp.MustCompile(`(?m)^==\d+== Collected : (\d+)`)

// instructions is the instructions per row of NAME_predict_batch under
// callgrind: the count over 2m rows less the count over m rows, over m, so
// the driver's start and reading are taken out.
func (s *side) instructions(rowsPath string, m int) (float64, error) {
	var ir [2]float64
	for i, rows := range []int{m, 2 * m} {
		cmd := exec.Command("valgrind", "--tool=callgrind", "--callgrind-out-file=/dev/null", s.bin, "count", rowsPath, strconv.Itoa(rows))
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		if err := cmd.Run(); err != nil {
			return 0, fmt.Errorf("%v: %s", err, stderr.String())
		}
		mm := callgrindTotal.FindSubmatch(stderr.Bytes())
		if mm == nil {
			return 0, fmt.Errorf("no instruction count in %q", stderr.String())
		}
		ir[i], _ = strconv.ParseFloat(string(mm[1]), 64)
	}
	return (ir[1] - ir[0]) / float64(m), nil
}

func stderrOf(err error) string {
	if ee, ok := err.(*exec.ExitError); ok {
		return string(ee.Stderr)
	}
	return ""
}

func joinInts(v []int) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = strconv.Itoa(x)
	}
	return strings.Join(s, ",")
}

// cDriver times model_predict_batch (one thread) and
// model_predict_batch_threads over the rows in batches:
//
//	bench ROWS.bin N REPS SINGLE OUT.bin THREADS,... BATCH,...   prints "time T B NS"
//	bench count ROWS.bin M                                       scores M rows once
//
// At batch 1 only the first SINGLE rows are scored. OUT.bin gets every
// row's last output from one pass, one thread, one batch.
const cDriver = `#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include "model.h"
#include "model_threads.h"

static double now(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static double *load(const char *path, long n)
{
	FILE *in = fopen(path, "rb");
	double *x = malloc(sizeof(double) * (size_t)n * MODEL_NUM_FEATURES);
	if (in == NULL || x == NULL || fread(x, sizeof(double), (size_t)n * MODEL_NUM_FEATURES, in) != (size_t)n * MODEL_NUM_FEATURES) {
		fprintf(stderr, "cannot read %ld rows from %s\n", n, path);
		exit(2);
	}
	fclose(in);
	return x;
}

static double pass(const double *x, long n, long batch, int threads, double *out)
{
	long r;
	double t0 = now();
	for (r = 0; r < n; r += batch) {
		size_t m = (size_t)(n - r < batch ? n - r : batch);
		if (threads == 1) {
			model_predict_batch(x + r * MODEL_NUM_FEATURES, m, out + r * MODEL_NUM_OUTPUTS);
		} else {
			model_predict_batch_threads(x + r * MODEL_NUM_FEATURES, m, out + r * MODEL_NUM_OUTPUTS, threads);
		}
	}
	return now() - t0;
}

int main(int argc, char **argv)
{
	long n, r, reps, single;
	double *x, *out, *last;
	char *tl, *bl, *t, *b, *save;
	FILE *o;
	if (argc == 4 && strcmp(argv[1], "count") == 0) {
		n = atol(argv[3]);
		x = load(argv[2], n);
		out = malloc(sizeof(double) * (size_t)n * MODEL_NUM_OUTPUTS);
		model_predict_batch(x, (size_t)n, out);
		return out[0] != out[0] ? 1 : 0;
	}
	if (argc != 8) {
		fprintf(stderr, "usage: bench ROWS.bin N REPS SINGLE OUT.bin THREADS BATCHES\n");
		return 2;
	}
	n = atol(argv[2]);
	reps = atol(argv[3]);
	single = atol(argv[4]);
	x = load(argv[1], n);
	out = malloc(sizeof(double) * (size_t)n * MODEL_NUM_OUTPUTS);
	last = malloc(sizeof(double) * (size_t)n);
	tl = strdup(argv[6]);
	for (t = strtok_r(tl, ",", &save); t != NULL; t = strtok_r(NULL, ",", &save)) {
		char *save2;
		bl = strdup(argv[7]);
		for (b = strtok_r(bl, ",", &save2); b != NULL; b = strtok_r(NULL, ",", &save2)) {
			long batch = atol(b), rows = batch == 1 && single < n ? single : n, k;
			double best = 1e300;
			for (k = 0; k < reps; k++) {
				double s = pass(x, rows, batch, atoi(t), out);
				best = s < best ? s : best;
			}
			printf("time %s %ld %.1f\n", t, batch, best / (double)rows * 1e9);
			fflush(stdout);
		}
		free(bl);
	}
	pass(x, n, n, 1, out);
	for (r = 0; r < n; r++) {
		last[r] = out[r * MODEL_NUM_OUTPUTS + MODEL_NUM_OUTPUTS - 1];
	}
	o = fopen(argv[5], "wb");
	if (o == NULL || fwrite(last, sizeof(double), (size_t)n, o) != (size_t)n || fclose(o) != 0) {
		fprintf(stderr, "cannot write %s\n", argv[5]);
		return 2;
	}
	return 0;
}
`

// goDriver is cDriver's counterpart for emitted Go: PredictBatch on one
// goroutine, PredictBatchWorkers on more.
const goDriver = `package main

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"time"

	"bench/model"
)

func main() {
	b, err := os.ReadFile(os.Args[1])
	if err != nil {
		panic(err)
	}
	n, _ := strconv.Atoi(os.Args[2])
	reps, _ := strconv.Atoi(os.Args[3])
	single, _ := strconv.Atoi(os.Args[4])
	flat := make([]float64, n*model.NumFeatures)
	for i := range flat {
		flat[i] = math.Float64frombits(binary.LittleEndian.Uint64(b[8*i:]))
	}
	rows := make([][]float64, n)
	for r := range rows {
		rows[r] = flat[r*model.NumFeatures : (r+1)*model.NumFeatures]
	}
	out := make([]float64, n*model.NumOutputs)
	for _, ts := range strings.Split(os.Args[6], ",") {
		t, _ := strconv.Atoi(ts)
		for _, bs := range strings.Split(os.Args[7], ",") {
			batch, _ := strconv.Atoi(bs)
			m := n
			if batch == 1 && single < n {
				m = single
			}
			best := math.Inf(1)
			for k := 0; k < reps; k++ {
				best = math.Min(best, pass(rows[:m], batch, t, out))
			}
			fmt.Printf("time %d %d %.1f\n", t, batch, best/float64(m)*1e9)
		}
	}
	pass(rows, n, 1, out)
	last := make([]byte, 8*n)
	for r := 0; r < n; r++ {
		binary.LittleEndian.PutUint64(last[8*r:], math.Float64bits(out[r*model.NumOutputs+model.NumOutputs-1]))
	}
	if err := os.WriteFile(os.Args[5], last, 0o644); err != nil {
		panic(err)
	}
}

func pass(rows [][]float64, batch, workers int, out []float64) float64 {
	t0 := time.Now()
	for r := 0; r < len(rows); r += batch {
		e := min(r+batch, len(rows))
		if err := model.PredictBatchWorkers(rows[r:e], out[r*model.NumOutputs:e*model.NumOutputs], workers); err != nil {
			panic(err)
		}
	}
	return time.Since(t0).Seconds()
}
`

// branchFloor measures, with a small C program, the ns per iteration of a
// loop whose branch follows random bits (the cost of a mispredicted
// branch with the loop's own work) and of the same loop over all-ones
// bits (predicted). A tree walk's split costs at least the second and,
// where the path is random, about the first.
func branchFloor(dir string) ([2]float64, error) {
	src := filepath.Join(dir, "floor.c")
	if err := os.WriteFile(src, []byte(floorC), 0o644); err != nil {
		return [2]float64{}, err
	}
	bin := filepath.Join(dir, "floor")
	if out, err := exec.Command("gcc", "-std=gnu99", "-O2", "-o", bin, src).CombinedOutput(); err != nil {
		return [2]float64{}, fmt.Errorf("gcc floor.c: %v\n%s", err, out)
	}
	out, err := exec.Command(bin).Output()
	if err != nil {
		return [2]float64{}, err
	}
	var r [2]float64
	if _, err := fmt.Sscanf(string(out), "%g %g", &r[0], &r[1]); err != nil {
		return r, fmt.Errorf("floor: %q: %v", out, err)
	}
	return r, nil
}

// floorC: the branch has an empty asm statement on one side, so the
// compiler keeps it a branch (no conditional move).
const floorC = `#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#define N (1 << 22)

static double now(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static double loop(const unsigned char *bits, long *sink)
{
	long i, a = 0, best = 0;
	double t, b = 1e300;
	int rep;
	for (rep = 0; rep < 7; rep++) {
		t = now();
		for (i = 0; i < N; i++) {
			if (bits[i]) {
				__asm__ volatile("" ::: "memory");
				a += i;
			} else {
				a ^= i;
			}
		}
		t = now() - t;
		b = t < b ? t : b;
		best += a;
	}
	*sink += best;
	return b / N * 1e9;
}

int main(void)
{
	unsigned char *r = malloc(N), *one = malloc(N);
	long i, sink = 0;
	unsigned s = 12345;
	for (i = 0; i < N; i++) {
		s = s * 1103515245u + 12345u;
		r[i] = (unsigned char)((s >> 16) & 1u);
		one[i] = 1;
	}
	printf("%.3f %.3f\n", loop(r, &sink), loop(one, &sink));
	return sink == 42;
}
`
