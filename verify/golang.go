package verify

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"go/format"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// goRunner builds emitted Go with the real toolchain. The package goes into
// a temporary module (module sawmilltest) with one more test file, a driver
// that reads rows as float64 bit patterns and writes outputs the same way,
// so nothing is lost to decimal formatting. One go test run then vets the
// package and its tests with every go vet check, builds them, runs the
// package's own model_test.go and scores the rows; the files are also
// checked to be gofmt-clean.
type goRunner struct {
	// NoChecks skips vet and gofmt (benchmarks).
	NoChecks bool
	// Arch, when set ("arm64"), cross-builds for that GOARCH and runs the
	// test binary under qemu-ARCH (qemu-user), as the runner GoArchRunner
	// names.
	Arch string
}

// GoArchRunner is the name of the runner that builds emitted Go for arm64
// and runs it under qemu-aarch64, where Go may fuse x*y+z into one
// instruction and math.Exp is assembly of its own.
const GoArchRunner = "go-arm64"

func (r goRunner) Name() string {
	if r.Arch != "" {
		return gotarget.Name + "-" + r.Arch
	}
	return gotarget.Name
}

func (goRunner) Layouts() []string { return gotarget.Layouts() }

// LayoutsFor: the host runner runs every layout; the cross runner (Arch)
// the table layout only, to keep CI short: the arithmetic after the walk,
// where fusion can strike, is the same code in every layout.
func (r goRunner) LayoutsFor(string) []string {
	if r.Arch != "" {
		return []string{"table"}
	}
	return r.Layouts()
}

func (goRunner) Variants() []string { return []string{""} }

func (goRunner) CompileOptions(string) compile.Options { return compile.Options{} }

// Tolerance: Go scores float64 with the same operations as the interpreter
// (and the same math.Exp), so every output must be bit-identical. On
// another architecture math.Exp is that architecture's own (arm64's is
// assembly using fused multiply-adds, measured 2 ulp from amd64's on the
// golden cases), so a transform calling it is held within the bound
// ctarget.ErrorBound derives for any two exps within 1 ulp of e^x.
func (r goRunner) Tolerance(_ string, p *compile.Program) (bool, float64) {
	if r.Arch == "" {
		return true, 0
	}
	b := ctarget.ErrorBound(p, false)
	return b == 0, b
}

// goPackage is the package name used in the test module; a name that is
// not "model" checks that Options.Package reaches every file.
const goPackage = "forestmodel"

func (goRunner) Emit(p *compile.Program, layout, _ string) ([]emit.File, error) {
	return gotarget.Emit(p, gotarget.Options{Package: goPackage, Layout: layout, Version: SnapshotVersion})
}

// goDriver is a test beside the emitted package's own: it scores the rows
// in $SAWMILL_ROWS (space-separated hex bit patterns, one row a line) into
// $SAWMILL_OUT (the outputs, then the class or -1), after a first line
// holding the scoring time in nanoseconds.
const goDriver = `package ` + goPackage + `

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"
)

func TestSawmillScore(t *testing.T) {
	rows := os.Getenv("SAWMILL_ROWS")
	if rows == "" {
		t.Skip("SAWMILL_ROWS is not set: no rows to score")
	}
	data, err := os.ReadFile(rows)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(string(data), "\n"), "\n")
	if len(data) == 0 {
		lines = nil
	}
	xs := make([][NumFeatures]float64, len(lines))
	for r, line := range lines {
		for i, f := range strings.Fields(line) {
			b, err := strconv.ParseUint(f, 16, 64)
			if err != nil {
				t.Fatal(err)
			}
			xs[r][i] = math.Float64frombits(b)
		}
	}
	outs := make([][NumOutputs]float64, len(xs))
	classes := make([]int, len(xs))
	start := time.Now()
	for r := range xs {
		outs[r] = Predict(&xs[r])
		classes[r] = class(&xs[r])
	}
	elapsed := time.Since(start)
	checkBatch(t, xs, outs)
	fh, err := os.Create(os.Getenv("SAWMILL_OUT"))
	if err != nil {
		t.Fatal(err)
	}
	w := bufio.NewWriter(fh)
	fmt.Fprintln(w, elapsed.Nanoseconds())
	for r := range outs {
		for _, v := range outs[r] {
			fmt.Fprintf(w, "%x ", math.Float64bits(v))
		}
		fmt.Fprintln(w, classes[r])
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	if err := fh.Close(); err != nil {
		t.Fatal(err)
	}
}

// checkBatch repeats the rows to enough for three goroutines and holds
// PredictBatch and PredictBatchWorkers to Predict's outputs bit for bit.
func checkBatch(t *testing.T, xs [][NumFeatures]float64, outs [][NumOutputs]float64) {
	if len(xs) == 0 {
		return
	}
	rows := make([][]float64, 3*BatchMinRows+1)
	for r := range rows {
		rows[r] = xs[r%len(xs)][:]
	}
	for _, workers := range []int{1, 3} {
		got := make([]float64, len(rows)*NumOutputs)
		if err := PredictBatchWorkers(rows, got, workers); err != nil {
			t.Fatal(err)
		}
		for r := range rows {
			for j, v := range outs[r%len(xs)] {
				if math.Float64bits(got[r*NumOutputs+j]) != math.Float64bits(v) {
					t.Fatalf("row %d, output %d: PredictBatchWorkers(%d) gives %v, Predict %v", r%len(xs), j, workers, got[r*NumOutputs+j], v)
				}
			}
		}
	}
	if err := PredictBatch(rows[:1], make([]float64, NumOutputs)); err != nil {
		t.Fatal(err)
	}
	if err := PredictBatch([][]float64{make([]float64, NumFeatures+1)}, make([]float64, NumOutputs)); err == nil {
		t.Fatal("PredictBatch took a row of NumFeatures+1 values")
	}
}
`

const goClassifierTail = `
func class(x *[NumFeatures]float64) int { return PredictClass(x) }
`

const goRegressorTail = `
func class(*[NumFeatures]float64) int { return -1 }
`

func (r goRunner) Score(ctx context.Context, p *compile.Program, layout, _ string, rows *forest.Rows, dir string) (*Result, error) {
	env, err := goEnv()
	if err != nil {
		return nil, err
	}
	files, err := gotarget.Emit(p, gotarget.Options{Package: goPackage, Layout: layout})
	if err != nil {
		return nil, err
	}
	pkgDir := filepath.Join(dir, goPackage)
	if err := os.MkdirAll(pkgDir, 0o755); err != nil {
		return nil, err
	}
	for _, f := range files {
		if !r.NoChecks {
			if formatted, err := format.Source(f.Data); err != nil || !bytes.Equal(formatted, f.Data) {
				return nil, fmt.Errorf("%s: generated file is not gofmt-clean (%v)", f.Name, err)
			}
		}
		if err := os.WriteFile(filepath.Join(pkgDir, f.Name), f.Data, 0o644); err != nil {
			return nil, err
		}
	}
	driver := goDriver + goRegressorTail
	if p.IsClassifier() {
		driver = goDriver + goClassifierTail
	}
	if err := os.WriteFile(filepath.Join(dir, "go.mod"), []byte("module sawmilltest\n\ngo 1.21\n"), 0o644); err != nil {
		return nil, err
	}
	if err := os.WriteFile(filepath.Join(pkgDir, "sawmill_driver_test.go"), []byte(driver), 0o644); err != nil {
		return nil, err
	}
	var in bytes.Buffer
	for i := 0; i < rows.Len(); i++ {
		for j, v := range rows.Row(i) {
			if j > 0 {
				in.WriteByte(' ')
			}
			in.WriteString(strconv.FormatUint(math.Float64bits(v), 16))
		}
		in.WriteByte('\n')
	}
	rowsFile, outFile := filepath.Join(dir, "rows.txt"), filepath.Join(dir, "out.txt")
	if err := os.WriteFile(rowsFile, in.Bytes(), 0o644); err != nil {
		return nil, err
	}
	vet := "-vet=all"
	if r.NoChecks {
		vet = "-vet=off"
	}
	start := time.Now()
	env = append(env[:len(env):len(env)], "SAWMILL_ROWS="+rowsFile, "SAWMILL_OUT="+outFile)
	args := []string{"test", "-count=1", vet}
	if r.Arch != "" {
		qemu := "qemu-" + map[string]string{"arm64": "aarch64"}[r.Arch]
		if _, err := exec.LookPath(qemu); err != nil {
			return nil, fmt.Errorf("%w: %s is not on PATH (Debian package qemu-user)", ErrSkip, qemu)
		}
		// Only the driver: the package's own model_test.go holds the
		// interpreter's bits as amd64 computes them, which arm64's math.Exp
		// misses by an ulp or two in a transform (see Tolerance).
		env = append(env, "GOARCH="+r.Arch)
		args = append(args, "-exec", qemu, "-run", "^TestSawmillScore$")
	}
	if err := goTool(ctx, env, dir, "go", append(args, "./"+goPackage)...); err != nil {
		return nil, err
	}
	total := time.Since(start)
	out, err := os.ReadFile(outFile)
	if err != nil {
		return nil, fmt.Errorf("go test ran but wrote no outputs: %v", err)
	}
	res := &Result{}
	if err := parseGoOutput(bytes.NewBuffer(out), p, rows.Len(), res); err != nil {
		return nil, err
	}
	res.Build = total - res.Run
	res.Toolchain = strings.TrimSpace(goEnvOnce.version + " test " + vet)
	if r.Arch != "" {
		res.Toolchain += " GOARCH=" + r.Arch + " under qemu-user"
	}
	return res, nil
}

func parseGoOutput(out *bytes.Buffer, p *compile.Program, n int, res *Result) error {
	sc := bufio.NewScanner(out)
	sc.Buffer(make([]byte, 1<<20), 1<<30)
	k := p.NumOutputs
	if !sc.Scan() {
		return fmt.Errorf("go driver output is empty")
	}
	ns, err := strconv.ParseInt(sc.Text(), 10, 64)
	if err != nil {
		return fmt.Errorf("go driver output line 1: %v", err)
	}
	res.Run = time.Duration(ns)
	line := 0
	for sc.Scan() {
		line++
		f := strings.Fields(sc.Text())
		if len(f) != k+1 {
			return fmt.Errorf("go driver output line %d: %d fields, want %d", line, len(f), k+1)
		}
		for _, s := range f[:k] {
			b, err := strconv.ParseUint(s, 16, 64)
			if err != nil {
				return fmt.Errorf("go driver output line %d: %v", line, err)
			}
			res.Outputs = append(res.Outputs, math.Float64frombits(b))
		}
		if p.IsClassifier() {
			c, err := strconv.Atoi(f[k])
			if err != nil {
				return fmt.Errorf("go driver output line %d: %v", line, err)
			}
			res.Classes = append(res.Classes, c)
		}
	}
	if line != n {
		return fmt.Errorf("go driver printed %d rows, want %d", line, n)
	}
	return nil
}

var goEnvOnce struct {
	sync.Once
	env     []string
	version string // "go1.26.8", as go env GOVERSION says
	err     error
}

// goEnv is the environment for the go command: the user's build cache
// (so repeated builds of the standard library are free), no workspace, no
// network, no toolchain switch. It is ErrSkip when no go command is found.
func goEnv() ([]string, error) {
	goEnvOnce.Do(func() {
		if _, err := exec.LookPath("go"); err != nil {
			goEnvOnce.err = ErrSkip
			return
		}
		env := os.Environ()
		env = append(env, "GOWORK=off", "GOFLAGS=", "GOTOOLCHAIN=local", "GOPROXY=off", "GO111MODULE=on", "CGO_ENABLED=0")
		out, err := exec.Command("go", "env", "GOCACHE").Output()
		if c := strings.TrimSpace(string(out)); err != nil || c == "" || c == "off" {
			env = append(env, "GOCACHE="+filepath.Join(os.TempDir(), "sawmill-gocache"))
		}
		goEnvOnce.env = env
		if v, err := exec.Command("go", "env", "GOVERSION").Output(); err == nil {
			goEnvOnce.version = strings.TrimSpace(string(v))
		}
	})
	return goEnvOnce.env, goEnvOnce.err
}

// goTool runs one go command in dir and returns its output in the error
// when it fails.
func goTool(ctx context.Context, env []string, dir string, name string, args ...string) error {
	cmd := exec.CommandContext(ctx, name, args...)
	cmd.Dir = dir
	cmd.Env = env
	out, err := cmd.CombinedOutput()
	if err != nil {
		return fmt.Errorf("%s %s: %v\n%s", name, strings.Join(args, " "), err, out)
	}
	return nil
}
