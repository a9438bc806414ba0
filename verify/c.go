package verify

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// cRunner builds emitted C with the real compilers and runs it. Every Score
// builds the program with a small driver that reads rows as float64 bit
// patterns and prints outputs with %a (exact), with several toolchains, each
// with -Wall -Wextra -Wpedantic -Wshadow -Wconversion -Wdouble-promotion
// -Wstrict-prototypes -Wmissing-prototypes (and -Werror with Werror); every
// build must print the same bytes. The registered runner uses cQuickMatrix (gcc -std=c99 -O2
// and clang -std=c11 -O0), which keeps the differential test cheap; with
// Full set (c_test.go runs every golden case so) it uses cMatrix, gcc and
// clang at -std=c99 and -std=c11 and -O0 and -O2 plus a gcc build with
// -fsanitize=address,undefined and a C++ compile of the header, or, above
// cFullMatrixNodes nodes, cBigMatrix. On a machine with one C compiler the
// builds are done with that one (cBuilds), and Result.Toolchain says which.
type cRunner struct {
	Full bool
	// Werror and AllCompilers are Config's.
	Werror, AllCompilers bool
	cEmit
}

// cEmit is what the C and board runners ask of the C they emit beyond the
// layout and the float build.
type cEmit struct {
	// IntLeaves is Config's: integer leaves, held within their bound.
	IntLeaves int
	// ConstantTime emits with ctarget.Options.ConstantTime.
	ConstantTime bool
	// Pack emits with ctarget.Options.Pack (packed bits).
	Pack bool
}

// options are the C target's options for layout, float or double.
func (b cEmit) options(layout string, float bool) ctarget.Options {
	return ctarget.Options{Name: cName, Layout: layout, Float: float, IntLeaves: b.IntLeaves, ConstantTime: b.ConstantTime, Pack: b.Pack}
}

// cName is the --name used in tests; not the default, so that a missed
// Options.Name shows.
const cName = "pumpmodel"

// cFullMatrixNodes is the largest program built in every configuration.
const cFullMatrixNodes = 3000

// cBuild is one toolchain configuration.
type cBuild struct {
	cc, std, opt string // opt: the optimisation level and any target flags, "O2 -mavx2"
	sanitize     bool
}

func (b cBuild) String() string {
	s := fmt.Sprintf("%s -std=%s -%s", b.cc, b.std, b.opt)
	if b.sanitize {
		s += " -fsanitize=address,undefined"
	}
	return s
}

// cMatrix is every configuration; the first is the one whose run is timed.
var cMatrix = []cBuild{
	{"gcc", "c99", "O2", false},
	{"gcc", "c99", "O0", false},
	{"gcc", "c11", "O2", false},
	{"gcc", "c11", "O0", false},
	{"clang", "c99", "O2", false},
	{"clang", "c99", "O0", false},
	{"clang", "c11", "O2", false},
	{"clang", "c11", "O0", false},
	{"gcc", "c99", "O1", true},
}

// cQuickMatrix is the registered runner's: both compilers, standards and
// optimisation levels, two builds.
var cQuickMatrix = []cBuild{
	{"gcc", "c99", "O2", false},
	{"clang", "c11", "O0", false},
}

// cBigMatrix is for big programs: both compilers and standards at -O2, and
// the sanitizers.
var cBigMatrix = []cBuild{
	{"gcc", "c99", "O2", false},
	{"clang", "c11", "O2", false},
	{"gcc", "c99", "O1", true},
}

// cWarnings are the warning flags of every build.
var cWarnings = []string{"-Wall", "-Wextra", "-Wpedantic", "-Wshadow", "-Wconversion", "-Wdouble-promotion",
	"-Wstrict-prototypes", "-Wmissing-prototypes"}

// warnings are the warning flags of r's builds: cWarnings, and -Werror when
// r asks for it.
func (r cRunner) warnings() []string {
	if r.Werror {
		return append(slices.Clone(cWarnings), "-Werror")
	}
	return cWarnings
}

// cJobs bounds the compilers and drivers running at once, over all Score
// calls of the process.
var cJobs = make(chan struct{}, runtime.NumCPU())

func (cRunner) Name() string { return ctarget.Name }

func (cRunner) Layouts() []string { return ctarget.Layouts() }

// Variants: double (bit-exact) and float (float API and arithmetic).
func (cRunner) Variants() []string { return []string{"double", "float"} }

func (cRunner) CompileOptions(variant string) compile.Options {
	return ctarget.Target().CompileOptions(variant == "float")
}

// Float32Inputs: the float variant takes float inputs, so its reference is
// the interpreter on the rows rounded to float32.
func (cRunner) Float32Inputs(variant string) bool { return variant == "float" }

// Tolerance: double C is bit-exact except that the transforms call the C
// library's exp; float C differs by float rounding. ctarget.ErrorBound derives
// both bounds.
func (r cRunner) Tolerance(variant string, p *compile.Program) (bool, float64) {
	if r.IntLeaves != 0 {
		return intLeafTolerance(p, r.options("", variant))
	}
	b := ctarget.ErrorBound(p, variant == "float")
	return b == 0, b
}

func (r cRunner) options(layout, variant string) ctarget.Options {
	return r.cEmit.options(layout, variant == "float")
}

func (r cRunner) Emit(p *compile.Program, layout, variant string) ([]emit.File, error) {
	o := r.options(layout, variant)
	o.Version = SnapshotVersion
	files, err := ctarget.Emit(p, o)
	return files, declined(err)
}

var cToolsOnce struct {
	sync.Once
	version map[string]string // compiler on PATH -> first line of its --version
	missing []string          // of gcc, clang, cc and g++
}

// cTools checks that a C compiler is installed: any one of gcc, clang and
// cc is enough (the builds of the matrices that need another are done with
// it instead, see cBuilds), and g++, which checks the header as C++, is
// used when present. With all set (Config.AllCompilers), gcc, clang and g++
// must all be there, so the full matrix never shrinks unseen. ErrSkip when
// there is no compiler.
func cTools(all bool) error {
	cToolsOnce.Do(func() {
		cToolsOnce.version = map[string]string{}
		var missing []string
		for _, t := range []string{"gcc", "clang", "cc", "g++"} {
			path, err := exec.LookPath(t)
			if err != nil {
				missing = append(missing, t)
				continue
			}
			out, _ := exec.Command(path, "--version").Output()
			v, _, _ := strings.Cut(string(out), "\n")
			cToolsOnce.version[t] = strings.TrimSpace(v)
		}
		cToolsOnce.missing = missing
	})
	have := func(t string) bool { _, ok := cToolsOnce.version[t]; return ok }
	switch {
	case all && !(have("gcc") && have("clang") && have("g++")):
		return fmt.Errorf("the full C matrix needs gcc, clang and g++; missing: %s", strings.Join(cToolsOnce.missing, ", "))
	case !have("gcc") && !have("clang") && !have("cc"):
		return fmt.Errorf("%w: no C compiler on PATH (tried gcc, clang, cc)", ErrSkip)
	}
	return nil
}

// cBuilds is matrix with the compilers this machine has: builds whose
// compiler is missing are done with the first of gcc, clang and cc present
// (the sanitizer build, which needs gcc's or clang's runtime, only by
// clang), duplicates dropped. cTools must have succeeded.
func cBuilds(matrix []cBuild) []cBuild {
	have := cToolsOnce.version
	var out []cBuild
	for _, b := range matrix {
		if _, ok := have[b.cc]; !ok {
			switch _, clang := have["clang"]; {
			case b.sanitize && clang:
				b.cc = "clang"
			case b.sanitize:
				continue
			default:
				b.cc = firstPresent(have, "gcc", "clang", "cc")
			}
		}
		if !slices.Contains(out, b) {
			out = append(out, b)
		}
	}
	return out
}

func firstPresent(have map[string]string, names ...string) string {
	for _, n := range names {
		if _, ok := have[n]; ok {
			return n
		}
	}
	panic("BUG: cBuilds without a C compiler")
}

// cxxPresent reports whether g++ is there to check the header as C++.
func cxxPresent() bool { _, ok := cToolsOnce.version["g++"]; return ok }

func (r cRunner) Score(ctx context.Context, p *compile.Program, layout, variant string, rows *forest.Rows, dir string) (*Result, error) {
	if err := cTools(r.AllCompilers); err != nil {
		return nil, err
	}
	if variant == "float" {
		if err := ctarget.FitsFloat(p); err != nil {
			return nil, fmt.Errorf("%w: float C: %v", ErrDeclined, err)
		}
	}
	matrix, cxx := cQuickMatrix, false
	switch {
	case r.Full && p.NumNodes() <= cFullMatrixNodes:
		matrix, cxx = cMatrix, cxxPresent()
	case r.Full:
		matrix = cBigMatrix
	}
	return r.score(ctx, p, r.options(layout, variant), rows, dir, cBuilds(matrix), cxx)
}

// score emits p, builds it in every configuration of matrix (and checks the
// header as C++ when cxx is set), runs each build over rows, requires every
// build to print the same bytes, and parses the output.
func (r cRunner) score(ctx context.Context, p *compile.Program, o ctarget.Options, rows *forest.Rows, dir string, matrix []cBuild, cxx bool) (*Result, error) {
	o.Threads = true // the driver checks NAME_predict_batch_threads too
	ft, err := writeC(p, o, dir)
	if err != nil {
		return nil, err
	}
	if err := os.WriteFile(filepath.Join(dir, "driver.c"), []byte(cDriver(o.Name, ft, p.IsClassifier())), 0o644); err != nil {
		return nil, err
	}
	in := filepath.Join(dir, "rows.txt")
	if err := os.WriteFile(in, cRows(rows), 0o644); err != nil {
		return nil, err
	}
	if cxx {
		src := fmt.Sprintf("#include \"%s.h\"\nint use(const %s *x);\nint use(const %s *x) { %s y[%s_NUM_OUTPUTS]; %s_predict(x, y); return y[0] > 0 ? 1 : 0; }\n",
			o.Name, ft, ft, ft, strings.ToUpper(o.Name), o.Name)
		if err := os.WriteFile(filepath.Join(dir, "header.cc"), []byte(src), 0o644); err != nil {
			return nil, err
		}
	}

	type job struct {
		b       cBuild
		bin     string
		out     []byte
		err     error
		buildAt time.Duration
		runFor  time.Duration
	}
	jobs := make([]*job, len(matrix))
	var wg sync.WaitGroup
	start := time.Now()
	for i, b := range matrix {
		jobs[i] = &job{b: b, bin: filepath.Join(dir, fmt.Sprintf("score%d", i))}
		wg.Add(1)
		go func(j *job) {
			defer wg.Done()
			cJobs <- struct{}{}
			defer func() { <-cJobs }()
			args := append([]string{"-std=" + j.b.std}, r.warnings()...)
			args = append(args, strings.Fields("-"+j.b.opt)...) // opt may carry a target flag: "O2 -mavx2"
			if j.b.sanitize {
				args = append(args, "-g", "-fsanitize=address,undefined", "-fno-sanitize-recover=all", "-fno-omit-frame-pointer")
			}
			args = append(args, "-o", j.bin, "driver.c", o.Name+".c", o.Name+"_threads.c", "-pthread", "-lm")
			if j.err = cCommand(ctx, dir, nil, nil, j.b.cc, args...); j.err != nil {
				return
			}
			j.buildAt = time.Since(start)
			var stdout bytes.Buffer
			t0 := time.Now()
			j.err = cCommand(ctx, dir, nil, &stdout, j.bin, in)
			j.runFor = time.Since(t0)
			j.out = stdout.Bytes()
		}(jobs[i])
	}
	var cxxErr error
	if cxx {
		wg.Add(1)
		go func() {
			defer wg.Done()
			cJobs <- struct{}{}
			defer func() { <-cJobs }()
			cxxErr = cCommand(ctx, dir, nil, nil, "g++", "-std=c++11", "-Wall", "-Wextra", "-Wpedantic", "-Werror", "-fsyntax-only", "header.cc")
		}()
	}
	wg.Wait()
	if cxxErr != nil {
		return nil, fmt.Errorf("the header as C++: %v", cxxErr)
	}
	res := &Result{}
	var tools []string
	for _, j := range jobs {
		if j.err != nil {
			return nil, fmt.Errorf("%s: %v", j.b, j.err)
		}
		res.Build = max(res.Build, j.buildAt)
		tools = append(tools, strings.Replace(j.b.String(), j.b.cc, ccVersion(j.b.cc), 1))
	}
	res.Toolchain = strings.Join(tools, "; ")
	for _, j := range jobs[1:] {
		if !bytes.Equal(j.out, jobs[0].out) {
			return nil, fmt.Errorf("%s and %s print different outputs:\n%s", jobs[0].b, j.b, firstDiff(jobs[0].out, j.out))
		}
	}
	res.Run = jobs[0].runFor
	if cxx {
		res.Toolchain += "; " + ccVersion("g++") + " (the header as C++)"
	}
	if err := parseCOutput(jobs[0].out, p, rows.Len(), res); err != nil {
		return nil, err
	}
	return res, nil
}

// writeC emits p under o into dir and returns the API's type, "double" or
// "float"; a construct the target cannot write is ErrDeclined.
func writeC(p *compile.Program, o ctarget.Options, dir string) (string, error) {
	files, err := ctarget.Emit(p, o)
	if err != nil {
		return "", declined(err)
	}
	for _, f := range files {
		if cEdit != nil {
			f.Data = cEdit(f.Name, f.Data)
		}
		if err := os.WriteFile(filepath.Join(dir, f.Name), f.Data, 0o644); err != nil {
			return "", err
		}
	}
	if o.Float {
		return "float", nil
	}
	return "double", nil
}

// cEdit, set only by tests, rewrites each emitted file before it is built,
// to plant a fault no program edit can (a wrong scale of integer leaves).
var cEdit func(name string, data []byte) []byte

var ccVersions sync.Map // compiler name → "gcc 12.2.0"

// ccVersion names a C compiler with its version, as -dumpversion prints
// it (gcc and clang both take it), or the name alone when it says nothing.
func ccVersion(cc string) string {
	if v, ok := ccVersions.Load(cc); ok {
		return v.(string)
	}
	name := cc
	if out, err := exec.Command(cc, "-dumpfullversion", "-dumpversion").Output(); err == nil {
		if v := strings.TrimSpace(string(out)); v != "" {
			name = cc + " " + v
		}
	}
	ccVersions.Store(cc, name)
	return name
}

// cCommand runs name in dir; a failure returns its output.
func cCommand(ctx context.Context, dir string, stdin []byte, stdout *bytes.Buffer, name string, args ...string) error {
	cmd := exec.CommandContext(ctx, name, args...)
	cmd.Dir = dir
	if stdin != nil {
		cmd.Stdin = bytes.NewReader(stdin)
	}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if stdout != nil {
		cmd.Stdout = stdout
	} else {
		cmd.Stdout = &stderr
	}
	if err := cmd.Run(); err != nil {
		msg := stderr.String()
		if len(msg) > 4000 {
			msg = msg[:4000] + "\n..."
		}
		return fmt.Errorf("%s %s: %v\n%s", name, strings.Join(args, " "), err, msg)
	}
	return nil
}

func firstDiff(a, b []byte) string {
	la, lb := strings.Split(string(a), "\n"), strings.Split(string(b), "\n")
	for i := 0; i < len(la) && i < len(lb); i++ {
		if la[i] != lb[i] {
			return fmt.Sprintf("line %d:\n  %s\n  %s", i+1, la[i], lb[i])
		}
	}
	return fmt.Sprintf("%d lines against %d", len(la), len(lb))
}

// cRows writes rows for the driver: a line "rows features", then each row's
// values as float64 bit patterns in hex.
func cRows(rows *forest.Rows) []byte {
	var b bytes.Buffer
	fmt.Fprintf(&b, "%d %d\n", rows.Len(), len(rows.Features))
	for i := 0; i < rows.Len(); i++ {
		for j, v := range rows.Row(i) {
			if j > 0 {
				b.WriteByte(' ')
			}
			b.WriteString(strconv.FormatUint(math.Float64bits(v), 16))
		}
		b.WriteByte('\n')
	}
	return b.Bytes()
}

// cDriver is the test main: it reads the rows file named by argv[1],
// narrows each value to the API's type (a no-op for double), and prints per
// row the outputs with %a and the predicted class (-1 for a regressor).
func cDriver(name, ft string, classifier bool) string {
	return `#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "` + name + `.h"
#include "` + name + `_threads.h"
` + cScoreFunc(name, ft, classifier) + `
int main(int argc, char **argv)
{
	FILE *in;
	int rc;
	if (argc != 2 || (in = fopen(argv[1], "r")) == NULL) {
		fprintf(stderr, "usage: score ROWS\n");
		return 2;
	}
	rc = score_` + name + `(in);
	fclose(in);
	return rc;
}
`
}

// cScoreFunc is a driver's static score_NAME(FILE *in): it reads the rows
// (as cRows writes them), narrows each value to the API's type, prints per
// row the outputs with %a and the predicted class (-1 for a regressor),
// after NAME_fp_check has found the floating-point unit fit (status 4
// otherwise), then scores all rows again with NAME_predict_batch, and runs
// of 1 to 70 rows (part blocks), and fails (status 3) unless every output
// has the same bits as NAME_predict's.
func cScoreFunc(name, ft string, classifier bool) string {
	up := strings.ToUpper(name)
	class := "-1"
	if classifier {
		class = name + "_predict_class(x)"
	}
	return cThreadsFunc(name, ft) + `
static int score_` + name + `(FILE *in)
{
	unsigned long rows, cols, r, i, n;
	int j, rc;
	` + ft + ` x[` + up + `_NUM_FEATURES];
	` + ft + ` y[` + up + `_NUM_OUTPUTS];
	` + ft + ` *xs, *ys, *yb;
	if (` + name + `_fp_check() != 0) {
		fprintf(stderr, "` + name + `_fp_check() is %d: the floating-point unit breaks exactness\n", ` + name + `_fp_check());
		return 4;
	}
	if (fscanf(in, "%lu %lu", &rows, &cols) != 2 || cols != ` + up + `_NUM_FEATURES) {
		fprintf(stderr, "bad header\n");
		return 2;
	}
	xs = malloc(sizeof(` + ft + `) * (rows + 1u) * ` + up + `_NUM_FEATURES);
	ys = malloc(sizeof(` + ft + `) * (rows + 1u) * ` + up + `_NUM_OUTPUTS);
	yb = malloc(sizeof(` + ft + `) * (rows + 1u) * ` + up + `_NUM_OUTPUTS);
	if (xs == NULL || ys == NULL || yb == NULL) {
		fprintf(stderr, "out of memory\n");
		return 2;
	}
	for (r = 0; r < rows; r++) {
		for (i = 0; i < cols; i++) {
			unsigned long long bits;
			double d;
			if (fscanf(in, "%llx", &bits) != 1) {
				fprintf(stderr, "row %lu: bad value\n", r);
				return 2;
			}
			memcpy(&d, &bits, sizeof d);
			x[i] = (` + ft + `)d;
		}
		` + name + `_predict(x, y);
		for (j = 0; j < ` + up + `_NUM_OUTPUTS; j++) {
			printf("%a ", (double)y[j]);
		}
		printf("%d\n", ` + class + `);
		memcpy(xs + r * ` + up + `_NUM_FEATURES, x, sizeof x);
		memcpy(ys + r * ` + up + `_NUM_OUTPUTS, y, sizeof y);
	}
	` + name + `_predict_batch(xs, (size_t)rows, yb);
	for (r = 0; r < rows; r++) {
		if (memcmp(ys + r * ` + up + `_NUM_OUTPUTS, yb + r * ` + up + `_NUM_OUTPUTS, sizeof y) != 0) {
			fprintf(stderr, "row %lu: ` + name + `_predict_batch differs from ` + name + `_predict\n", r);
			return 3;
		}
	}
	for (n = 1u; n <= 70u && n <= rows; n++) { /* batches of 1 to 70 rows: part blocks, lanes past the count */
		r = (n * 7u) % (rows - n + 1u);
		` + name + `_predict_batch(xs + r * ` + up + `_NUM_FEATURES, (size_t)n, yb);
		if (memcmp(ys + r * ` + up + `_NUM_OUTPUTS, yb, sizeof y * n) != 0) {
			fprintf(stderr, "rows %lu to %lu: ` + name + `_predict_batch of %lu rows differs from ` + name + `_predict\n", r, r + n - 1u, n);
			return 3;
		}
	}
	free(yb);
	rc = check_threads_` + name + `(xs, ys, rows);
	free(xs);
	free(ys);
	return rc;
}
`
}

// cThreadsFunc is a driver's static check_threads_NAME(xs, ys, rows): it
// repeats the rows xs (whose NAME_predict outputs are ys) to enough rows for
// three threads of NAME_predict_batch_threads, scores them so, and fails
// (status 3) unless every output has the same bits as NAME_predict's, or
// the rows were not split in three.
func cThreadsFunc(name, ft string) string {
	up := strings.ToUpper(name)
	return `
static int check_threads_` + name + `(const ` + ft + ` *xs, const ` + ft + ` *ys, unsigned long rows)
{
	unsigned long m = 3u * ` + up + `_THREADS_MIN_ROWS, r;
	` + ft + ` *xm, *ym;
	int parts;
	if (rows == 0) {
		return 0;
	}
	xm = malloc(sizeof(` + ft + `) * m * ` + up + `_NUM_FEATURES);
	ym = malloc(sizeof(` + ft + `) * m * ` + up + `_NUM_OUTPUTS);
	if (xm == NULL || ym == NULL) {
		fprintf(stderr, "out of memory\n");
		return 2;
	}
	for (r = 0; r < m; r++) {
		memcpy(xm + r * ` + up + `_NUM_FEATURES, xs + (r % rows) * ` + up + `_NUM_FEATURES, sizeof(` + ft + `) * ` + up + `_NUM_FEATURES);
	}
	parts = ` + name + `_predict_batch_threads(xm, (size_t)m, ym, 3);
	if (parts != 3) {
		fprintf(stderr, "` + name + `_predict_batch_threads split %lu rows in %d parts, want 3\n", m, parts);
		return 3;
	}
	for (r = 0; r < m; r++) {
		if (memcmp(ys + (r % rows) * ` + up + `_NUM_OUTPUTS, ym + r * ` + up + `_NUM_OUTPUTS, sizeof(` + ft + `) * ` + up + `_NUM_OUTPUTS) != 0) {
			fprintf(stderr, "row %lu: ` + name + `_predict_batch_threads differs from ` + name + `_predict\n", r % rows);
			return 3;
		}
	}
	free(xm);
	free(ym);
	return 0;
}
`
}

// parseCOutput reads the driver's lines: NumOutputs %a numbers and a class.
func parseCOutput(out []byte, p *compile.Program, n int, res *Result) error {
	sc := bufio.NewScanner(bytes.NewReader(out))
	sc.Buffer(make([]byte, 1<<20), 1<<30)
	k := p.NumOutputs
	line := 0
	for sc.Scan() {
		line++
		f := strings.Fields(sc.Text())
		if len(f) != k+1 {
			return fmt.Errorf("c driver output line %d: %d fields, want %d", line, len(f), k+1)
		}
		for _, s := range f[:k] {
			v, err := parseHexFloat(s)
			if err != nil {
				return fmt.Errorf("c driver output line %d: %v", line, err)
			}
			res.Outputs = append(res.Outputs, v)
		}
		if p.IsClassifier() {
			c, err := strconv.Atoi(f[k])
			if err != nil {
				return fmt.Errorf("c driver output line %d: %v", line, err)
			}
			res.Classes = append(res.Classes, c)
		}
	}
	if line != n {
		return fmt.Errorf("c driver printed %d rows, want %d", line, n)
	}
	return nil
}

// parseHexFloat reads printf's %a: hex floats, inf, nan (with signs).
func parseHexFloat(s string) (float64, error) {
	switch strings.TrimLeft(s, "+-") {
	case "nan":
		return math.NaN(), nil
	case "inf":
		if s[0] == '-' {
			return math.Inf(-1), nil
		}
		return math.Inf(1), nil
	}
	return strconv.ParseFloat(s, 64)
}

// Float32Inputs is implemented by runners with a variant that takes float32
// inputs (C's float API): the reference for that variant is the interpreter
// on the rows rounded to float32, since that is all the emitted code
// receives.
type Float32Inputs interface {
	Float32Inputs(variant string) bool
}
