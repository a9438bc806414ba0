package golden

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	"sawmill/compile"
	"sawmill/emit"
	"sawmill/emit/golang"
	"sawmill/forest"
)

// goRunner builds emitted Go with the real toolchain: the package goes into
// a temporary module (module sawmilltest) beside a small main that reads
// rows as float64 bit patterns and prints outputs the same way, so nothing
// is lost to decimal formatting. Each Score also runs gofmt -l and the
// package's own model_test.go under every go vet check.
type goRunner struct {
	// NoChecks skips vet, gofmt and the emitted test (benchmarks).
	NoChecks bool
}

func (goRunner) Name() string { return "go" }

func (goRunner) Layouts() []string { return []string{emit.Nested, emit.Table} }

func (goRunner) Variants() []string { return []string{""} }

func (goRunner) CompileOptions(string) compile.Options { return compile.Options{} }

// Tolerance: Go scores float64 with the same operations as the interpreter
// (and the same math.Exp), so every output must be bit-identical.
func (goRunner) Tolerance(string, *compile.Program) (bool, float64) { return true, 0 }

// goPackage is the package name used in the test module; a name that is
// not "model" checks that Options.Package reaches every file.
const goPackage = "forestmodel"

func (goRunner) Emit(p *compile.Program, layout, _ string) ([]emit.File, error) {
	return golang.Emit(p, golang.Options{Package: goPackage, Layout: layout})
}

// goDriver is the main of the test module: rows of space-separated hex bit
// patterns on stdin, outputs (and the class) the same way on stdout.
const goDriver = `package main

import (
	"bufio"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"

	model "sawmilltest/` + goPackage + `"
)

func main() {
	in := bufio.NewScanner(os.Stdin)
	in.Buffer(make([]byte, 1<<20), 1<<30)
	out := bufio.NewWriter(os.Stdout)
	defer out.Flush()
	for in.Scan() {
		var x [model.NumFeatures]float64
		for i, f := range strings.Fields(in.Text()) {
			b, err := strconv.ParseUint(f, 16, 64)
			if err != nil {
				fmt.Fprintln(os.Stderr, err)
				os.Exit(2)
			}
			x[i] = math.Float64frombits(b)
		}
		for _, v := range model.Predict(&x) {
			fmt.Fprintf(out, "%x ", math.Float64bits(v))
		}
		fmt.Fprintln(out, class(&x))
	}
	if err := in.Err(); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(2)
	}
}
`

const goClassifierTail = `
func class(x *[model.NumFeatures]float64) int { return model.PredictClass(x) }
`

const goRegressorTail = `
func class(x *[model.NumFeatures]float64) int { return -1 }
`

func (r goRunner) Score(ctx context.Context, p *compile.Program, layout, _ string, rows *forest.Rows, dir string) (*Result, error) {
	env, err := goEnv()
	if err != nil {
		return nil, err
	}
	files, err := golang.Emit(p, golang.Options{Package: goPackage, Layout: layout})
	if err != nil {
		return nil, err
	}
	pkgDir := filepath.Join(dir, goPackage)
	if err := os.MkdirAll(pkgDir, 0o755); err != nil {
		return nil, err
	}
	for _, f := range files {
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
	if err := os.WriteFile(filepath.Join(dir, "main.go"), []byte(driver), 0o644); err != nil {
		return nil, err
	}
	res := &Result{}
	start := time.Now()
	bin := filepath.Join(dir, "score")
	if err := goTool(ctx, env, dir, "go", "build", "-o", bin, "."); err != nil {
		return nil, err
	}
	res.Build = time.Since(start)
	if !r.NoChecks {
		if err := goChecks(ctx, env, dir, pkgDir); err != nil {
			return nil, err
		}
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
	start = time.Now()
	cmd := exec.CommandContext(ctx, bin)
	cmd.Dir = dir
	cmd.Stdin = &in
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	if err := cmd.Run(); err != nil {
		return nil, fmt.Errorf("%s: %v\n%s", bin, err, stderr.Bytes())
	}
	res.Run = time.Since(start)
	if err := parseGoOutput(&stdout, p, rows.Len(), res); err != nil {
		return nil, err
	}
	return res, nil
}

// goChecks runs gofmt -l over the package, then the package's own test
// with every go vet check (go test -vet=all vets the package and its test
// in the same run).
func goChecks(ctx context.Context, env []string, dir, pkgDir string) error {
	gofmt, err := gofmtPath(ctx, env)
	if err != nil {
		return err
	}
	cmd := exec.CommandContext(ctx, gofmt, "-l", pkgDir)
	out, err := cmd.CombinedOutput()
	if err != nil {
		return fmt.Errorf("gofmt -l: %v\n%s", err, out)
	}
	if len(bytes.TrimSpace(out)) > 0 {
		return fmt.Errorf("gofmt -l: generated files are not gofmt-clean:\n%s", out)
	}
	return goTool(ctx, env, dir, "go", "test", "-count=1", "-vet=all", "./"+goPackage)
}

func parseGoOutput(out *bytes.Buffer, p *compile.Program, n int, res *Result) error {
	sc := bufio.NewScanner(out)
	sc.Buffer(make([]byte, 1<<20), 1<<30)
	k := p.NumOutputs
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
	env []string
	err error
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
	})
	return goEnvOnce.env, goEnvOnce.err
}

var gofmtOnce struct {
	sync.Once
	path string
	err  error
}

// gofmtPath finds the gofmt of the go command in use.
func gofmtPath(ctx context.Context, env []string) (string, error) {
	gofmtOnce.Do(func() {
		cmd := exec.CommandContext(ctx, "go", "env", "GOROOT")
		cmd.Env = env
		out, err := cmd.Output()
		if err != nil {
			gofmtOnce.err = fmt.Errorf("go env GOROOT: %v", err)
			return
		}
		gofmtOnce.path = filepath.Join(strings.TrimSpace(string(out)), "bin", "gofmt")
		if _, err := os.Stat(gofmtOnce.path); err != nil {
			gofmtOnce.err = fmt.Errorf("gofmt is not beside the go command: %v", err)
		}
	})
	return gofmtOnce.path, gofmtOnce.err
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
