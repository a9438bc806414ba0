package verify

import (
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
	"time"

	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// goBatchDriver is the package that scores a batch: a test importing every
// job's package, which for each job in turn runs the package's emitted
// TestPredict as a subtest and, when it passes, scores rows<i>.txt into
// out<i>.txt in the format of goDriver. A file "done" marks a run that got
// through every job.
const goBatchDriver = "sawmilldriver"

// ScoreBatch implements BatchScorer: every job is its own package
// (forestmodel<i>) in one temporary module, and one test binary built from
// a driver importing them all scores every job. The emitted model_test.go
// goes in as model_check.go, an ordinary file, so the driver can call its
// TestPredict. Jobs that are not Light are checked gofmt-clean and vetted
// with every go vet check in one go vet run.
func (r goRunner) ScoreBatch(ctx context.Context, jobs []Job, dir string) ([]BatchResult, error) {
	env, err := goEnv()
	if err != nil {
		return nil, err
	}
	res := make([]BatchResult, len(jobs))
	var built, vet []int
	for i, j := range jobs {
		pkg := fmt.Sprintf("%s%d", goPackage, i)
		files, err := gotarget.Emit(j.Program, gotarget.Options{Package: pkg, Layout: j.Layout})
		if err != nil {
			res[i].Err = err
			continue
		}
		checks := !r.NoChecks && !j.Light
		pkgDir := filepath.Join(dir, pkg)
		if err := os.Mkdir(pkgDir, 0o755); err != nil {
			return nil, err
		}
		for _, f := range files {
			if checks {
				if formatted, err := format.Source(f.Data); err != nil || !bytes.Equal(formatted, f.Data) {
					res[i].Err = fmt.Errorf("%s: generated file is not gofmt-clean (%v)", f.Name, err)
					break
				}
			}
			name := f.Name
			if name == gotarget.TestFile {
				name = "model_check.go"
			}
			if err := os.WriteFile(filepath.Join(pkgDir, name), f.Data, 0o644); err != nil {
				return nil, err
			}
		}
		if res[i].Err != nil {
			continue
		}
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("rows%d.txt", i)), goRows(j.Rows), 0o644); err != nil {
			return nil, err
		}
		built = append(built, i)
		if checks {
			vet = append(vet, i)
		}
	}
	if len(built) == 0 {
		return res, nil
	}
	if err := os.WriteFile(filepath.Join(dir, "go.mod"), []byte("module sawmilltest\n\ngo 1.21\n"), 0o644); err != nil {
		return nil, err
	}
	drvDir := filepath.Join(dir, goBatchDriver)
	if err := os.Mkdir(drvDir, 0o755); err != nil {
		return nil, err
	}
	if err := os.WriteFile(filepath.Join(drvDir, "driver_test.go"), goBatchSource(jobs, built), 0o644); err != nil {
		return nil, err
	}
	start := time.Now()
	if len(vet) > 0 {
		args := []string{"vet"}
		for _, i := range vet {
			args = append(args, fmt.Sprintf("./%s%d", goPackage, i))
		}
		if err := goTool(ctx, env, dir, "go", args...); err != nil {
			return nil, err
		}
	}
	bin := filepath.Join(dir, "driver.test")
	if err := goTool(ctx, env, dir, "go", "test", "-c", "-vet=off", "-o", bin, "./"+goBatchDriver); err != nil {
		return nil, err
	}
	build := time.Since(start)
	cmd := exec.CommandContext(ctx, bin, "-test.v", "-test.run", "^TestSawmillBatch$")
	cmd.Dir = drvDir
	cmd.Env = append(env[:len(env):len(env)], "SAWMILL_BATCH="+dir)
	out, runErr := cmd.CombinedOutput()
	if _, err := os.Stat(filepath.Join(dir, "done")); err != nil {
		// It stopped part way (a panic, a hang): which job is for the
		// caller to find.
		return nil, fmt.Errorf("go batch driver stopped before the last job: %v\n%s", runErr, tail(out, 4000))
	}
	for _, i := range built {
		data, err := os.ReadFile(filepath.Join(dir, fmt.Sprintf("out%d.txt", i)))
		if err != nil {
			res[i].Err = fmt.Errorf("go batch driver: job %d failed:\n%s", i, goSubtestLog(out, fmt.Sprintf("%s%d", goPackage, i)))
			continue
		}
		rr := &Result{Build: build}
		if err := parseGoOutput(bytes.NewBuffer(data), jobs[i].Program, jobs[i].Rows.Len(), rr); err != nil {
			res[i].Err = err
			continue
		}
		res[i].Result = rr
	}
	return res, nil
}

// goRows writes rows as goDriver reads them: space-separated hex bit
// patterns, one row a line.
func goRows(rows *forest.Rows) []byte {
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
	return in.Bytes()
}

// goBatchSource is the driver test for the jobs in built.
func goBatchSource(jobs []Job, built []int) []byte {
	var b strings.Builder
	b.WriteString(`package ` + goBatchDriver + `

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"
`)
	for _, i := range built {
		fmt.Fprintf(&b, "\n\tm%d \"sawmilltest/%s%d\"", i, goPackage, i)
	}
	b.WriteString("\n)\n\nvar jobs = []struct {\n\tid    int\n\tname  string\n\tcheck func(*testing.T)\n\tscore func([]float64) ([]float64, int)\n\tbatch func([][]float64, []float64, int) error\n}{\n")
	for _, i := range built {
		class := "-1"
		if jobs[i].Program.IsClassifier() {
			class = fmt.Sprintf("m%d.PredictClass(&a)", i)
		}
		fmt.Fprintf(&b, "\t{%d, %q, m%d.TestPredict, func(x []float64) ([]float64, int) {\n\t\tvar a [m%d.NumFeatures]float64\n\t\tcopy(a[:], x)\n\t\ty := m%d.Predict(&a)\n\t\treturn y[:], %s\n\t}, m%d.PredictBatchWorkers},\n",
			i, fmt.Sprintf("%s%d", goPackage, i), i, i, i, class, i)
	}
	b.WriteString(`}

func TestSawmillBatch(t *testing.T) {
	dir := os.Getenv("SAWMILL_BATCH")
	if dir == "" {
		t.Skip("SAWMILL_BATCH is not set: no batch to score")
	}
	for _, j := range jobs {
		if !t.Run(j.name, j.check) {
			continue
		}
		if err := score(dir, j.id, j.score, j.batch); err != nil {
			t.Errorf("%s: %v", j.name, err)
		}
	}
	if err := os.WriteFile(filepath.Join(dir, "done"), nil, 0o644); err != nil {
		t.Fatal(err)
	}
}

func score(dir string, id int, predict func([]float64) ([]float64, int), batch func([][]float64, []float64, int) error) error {
	data, err := os.ReadFile(filepath.Join(dir, fmt.Sprintf("rows%d.txt", id)))
	if err != nil {
		return err
	}
	lines := strings.Split(strings.TrimSuffix(string(data), "\n"), "\n")
	if len(data) == 0 {
		lines = nil
	}
	xs := make([][]float64, len(lines))
	for r, line := range lines {
		for _, f := range strings.Fields(line) {
			b, err := strconv.ParseUint(f, 16, 64)
			if err != nil {
				return err
			}
			xs[r] = append(xs[r], math.Float64frombits(b))
		}
	}
	outs := make([][]float64, len(xs))
	classes := make([]int, len(xs))
	start := time.Now()
	for r := range xs {
		outs[r], classes[r] = predict(xs[r])
	}
	elapsed := time.Since(start)
	if err := checkBatch(xs, outs, batch); err != nil {
		return err
	}
	var w strings.Builder
	fmt.Fprintln(&w, elapsed.Nanoseconds())
	for r := range outs {
		for _, v := range outs[r] {
			fmt.Fprintf(&w, "%x ", math.Float64bits(v))
		}
		fmt.Fprintln(&w, classes[r])
	}
	tmp := filepath.Join(dir, fmt.Sprintf("out%d.tmp", id))
	if err := os.WriteFile(tmp, []byte(w.String()), 0o644); err != nil {
		return err
	}
	return os.Rename(tmp, filepath.Join(dir, fmt.Sprintf("out%d.txt", id)))
}

// checkBatch repeats the rows to 200 and holds PredictBatchWorkers, on one
// goroutine and on three, to Predict's outputs bit for bit.
func checkBatch(xs, outs [][]float64, batch func([][]float64, []float64, int) error) error {
	if len(xs) == 0 {
		return nil
	}
	k := len(outs[0])
	rows := make([][]float64, 200)
	for r := range rows {
		rows[r] = xs[r%len(xs)]
	}
	for _, workers := range []int{1, 3} {
		got := make([]float64, len(rows)*k)
		if err := batch(rows, got, workers); err != nil {
			return err
		}
		for r := range rows {
			for j, v := range outs[r%len(xs)] {
				if math.Float64bits(got[r*k+j]) != math.Float64bits(v) {
					return fmt.Errorf("row %d, output %d: PredictBatchWorkers(%d) gives %v, Predict %v", r%len(xs), j, workers, got[r*k+j], v)
				}
			}
		}
	}
	return nil
}
`)
	return []byte(b.String())
}

// goSubtestLog is the part of a -test.v log about subtest name.
func goSubtestLog(out []byte, name string) string {
	var keep []string
	in := false
	for _, line := range strings.Split(string(out), "\n") {
		if strings.HasPrefix(line, "=== RUN") {
			in = strings.HasSuffix(line, "/"+name)
		}
		if in || strings.Contains(line, name+":") {
			keep = append(keep, line)
		}
	}
	return tail([]byte(strings.Join(keep, "\n")), 4000)
}

// tail is the last n bytes of b, marked when cut.
func tail(b []byte, n int) string {
	if len(b) <= n {
		return string(b)
	}
	return "...\n" + string(b[len(b)-n:])
}
