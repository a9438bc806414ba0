package verify

import (
	"bufio"
	"context"
	_ "embed"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	dbsql "database/sql"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

//go:embed spark_driver.py
var sparkDriver []byte

// sparkRunner runs spark text in Spark SQL through PySpark in local mode:
// one long-lived session a test process (see sparkSession), driven by
// spark_driver.py, which reads a request a line on stdin and answers a
// line on stdout. Rows travel as the hex of their float64 bits and come
// back so, so nothing is rounded on the way. Spark stores NaN, so every
// row with a missing value is scored a second time with NaN stored
// (nanTwins, as for PostgreSQL and DuckDB).
//
// Only the spark dialect runs: Spark reads the double-quoted identifiers of
// ANSI text as strings.
type sparkRunner struct {
	sqlRunner
	python string // Config.SparkPython; "" for SparkPython()
	// ansiOff runs with spark.sql.ansi.enabled off (Spark 4's default is on).
	ansiOff bool
}

// Variants: "" is the query form, "function" the function form
// (scoreSparkFunction).
func (sparkRunner) Variants() []string { return []string{"", functionVariant} }

// Layouts is the table layout only, the one auto writes for Spark: every
// statement costs Spark seconds to plan and compile (1.4 to 5.6 s for a
// 30-tree forest, see sqltarget's sparkAutoWhy), and CI's share for Spark is
// about ten minutes. TestSparkNested runs the nested layout on a few cases.
func (sparkRunner) Layouts() []string { return []string{emit.Table} }

// WithPython points the runner at a Python that imports pyspark.
func (r sparkRunner) WithPython(python string) Runner { r.python = python; return r }

// WithMaxNest: see sqlRunner.WithMaxNest.
func (r sparkRunner) WithMaxNest(n int) Runner { r.maxNest = n; return r }

// WithANSI returns the runner with spark.sql.ansi.enabled set to on.
func (r sparkRunner) WithANSI(on bool) Runner { r.ansiOff = !on; return r }

// SparkPython is the Python the spark runner starts when no Config names
// one: $SAWMILL_SPARK_PYTHON, else python3 when it imports pyspark.
// chosen reports whether the variable named it (then a failure to start
// is an error, not a skip).
func SparkPython() (python string, chosen bool, err error) {
	if p := os.Getenv("SAWMILL_SPARK_PYTHON"); p != "" {
		return p, true, nil
	}
	p, err := exec.LookPath("python3")
	if err != nil {
		return "", false, fmt.Errorf("%w: no python3 on PATH for Spark; set SAWMILL_SPARK_PYTHON (or sawmill verify --spark-python) to a Python with pyspark", ErrSkip)
	}
	if out, err := exec.Command(p, "-c", "import pyspark").CombinedOutput(); err != nil {
		return "", false, fmt.Errorf("%w: %s does not import pyspark (%s); set SAWMILL_SPARK_PYTHON (or sawmill verify --spark-python) to a Python with pyspark", ErrSkip, p, firstLine(out))
	}
	return p, false, nil
}

func firstLine(b []byte) string {
	s := strings.TrimSpace(string(b))
	if i := strings.LastIndexByte(s, '\n'); i >= 0 {
		s = s[i+1:]
	}
	return s
}

// sparkProc is a running driver.
type sparkProc struct {
	cmd     *exec.Cmd
	in      io.WriteCloser
	out     *bufio.Reader
	stderr  *tailBuffer
	version string
	dir     string
}

// sparkSessions holds one driver per Python, started on first use and kept
// for the life of the process; mu serialises requests (one session, two
// cores: requests in parallel would only compete).
var sparkSessions = struct {
	sync.Mutex
	procs map[string]*sparkProc
}{procs: map[string]*sparkProc{}}

// tailBuffer keeps the last bytes written to it: the driver's stderr, for
// messages when it dies.
type tailBuffer struct {
	mu  sync.Mutex
	buf []byte
}

func (t *tailBuffer) Write(p []byte) (int, error) {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.buf = append(t.buf, p...)
	if len(t.buf) > 8192 {
		t.buf = t.buf[len(t.buf)-8192:]
	}
	return len(p), nil
}

func (t *tailBuffer) String() string {
	t.mu.Lock()
	defer t.mu.Unlock()
	return string(t.buf)
}

// startSpark starts the driver under python and waits for its session.
func startSpark(python string) (*sparkProc, error) {
	dir, err := os.MkdirTemp("", "sawmill-spark")
	if err != nil {
		return nil, err
	}
	script := filepath.Join(dir, "spark_driver.py")
	if err := os.WriteFile(script, sparkDriver, 0o644); err != nil {
		return nil, err
	}
	cmd := exec.Command(python, script)
	cmd.Dir = dir
	tail := &tailBuffer{}
	cmd.Stderr = tail
	in, err := cmd.StdinPipe()
	if err != nil {
		return nil, err
	}
	out, err := cmd.StdoutPipe()
	if err != nil {
		return nil, err
	}
	if err := cmd.Start(); err != nil {
		os.RemoveAll(dir)
		return nil, fmt.Errorf("spark: start %s: %v", python, err)
	}
	p := &sparkProc{cmd: cmd, in: in, out: bufio.NewReaderSize(out, 1<<20), stderr: tail, dir: dir}
	var hello struct {
		OK      bool   `json:"ok"`
		Version string `json:"version"`
	}
	line, err := p.out.ReadBytes('\n')
	if err == nil {
		err = json.Unmarshal(line, &hello)
	}
	if err != nil || !hello.OK {
		p.stop()
		return nil, fmt.Errorf("spark: the driver under %s did not start a session: %v\n%s", python, err, lastLines(tail.String(), 15))
	}
	p.version = hello.Version
	return p, nil
}

func (p *sparkProc) stop() {
	p.in.Close()
	done := make(chan struct{})
	go func() { p.cmd.Wait(); close(done) }()
	select {
	case <-done:
	case <-time.After(20 * time.Second):
		p.cmd.Process.Kill()
		<-done
	}
	os.RemoveAll(p.dir)
}

func lastLines(s string, n int) string {
	lines := strings.Split(strings.TrimRight(s, "\n"), "\n")
	if len(lines) > n {
		lines = lines[len(lines)-n:]
	}
	return strings.Join(lines, "\n")
}

// sparkRequest is one statement over one table, as spark_driver.py reads it.
type sparkRequest struct {
	Table   string   `json:"table"`
	Columns []string `json:"columns"`
	Rows    [][]any  `json:"rows"`
	SQL     string   `json:"sql"`
	Outputs int      `json:"outputs"`
	Label   bool     `json:"label"`
	ANSI    bool     `json:"ansi"`
	// Op "exec" runs Setup, then SQL, over tables Spark makes itself
	// (SparkExec); "" scores Rows.
	Op    string   `json:"op,omitempty"`
	Setup []string `json:"setup,omitempty"`
}

// sparkAnswer is the driver's answer.
type sparkAnswer struct {
	OK        bool    `json:"ok"`
	Error     string  `json:"error"`
	Rows      [][]any `json:"rows"`
	PlanMS    float64 `json:"plan_ms"`
	CodegenMS float64 `json:"codegen_ms"`
	RunMS     float64 `json:"run_ms"`
	MaxMethod int     `json:"max_method"`
	WSCG      int     `json:"wscg"`
	Version   string  `json:"version"`
	HugeLimit int     `json:"huge_method_limit"`
	SetupMS   float64 `json:"setup_ms"`
	// WSCGOff is why whole-stage code generation failed to compile the
	// plan, which then ran with it off ("" when it ran with it).
	WSCGOff string `json:"wscg_off"`
	// Projections is the number of projections in the optimized plan.
	Projections int `json:"projections"`
}

// ask sends req to the session under python, starting it when needed, and
// waits for the answer or ctx. A driver that dies or is interrupted is
// stopped and started afresh on the next request.
func askSpark(ctx context.Context, python string, req *sparkRequest) (*sparkAnswer, string, error) {
	sparkSessions.Lock()
	defer sparkSessions.Unlock()
	p := sparkSessions.procs[python]
	if p == nil {
		var err error
		if p, err = startSpark(python); err != nil {
			return nil, "", err
		}
		sparkSessions.procs[python] = p
	}
	line, err := json.Marshal(req)
	if err != nil {
		return nil, "", err
	}
	type reply struct {
		b   []byte
		err error
	}
	ch := make(chan reply, 1)
	go func() {
		if _, err := p.in.Write(append(line, '\n')); err != nil {
			ch <- reply{nil, err}
			return
		}
		b, err := p.out.ReadBytes('\n')
		ch <- reply{b, err}
	}()
	var rep reply
	select {
	case rep = <-ch:
	case <-ctx.Done():
		p.cmd.Process.Kill()
		<-ch
		rep.err = ctx.Err()
	}
	if rep.err != nil {
		delete(sparkSessions.procs, python)
		p.stop()
		return nil, p.version, fmt.Errorf("spark: driver: %v\n%s", rep.err, lastLines(p.stderr.String(), 15))
	}
	var a sparkAnswer
	if err := json.Unmarshal(rep.b, &a); err != nil {
		return nil, p.version, fmt.Errorf("spark: driver answered %q: %v", firstLine(rep.b), err)
	}
	return &a, p.version, nil
}

// jvmHugeMethod is the size in bytes of bytecode above which HotSpot does
// not JIT-compile a method (its HugeMethodLimit, with DontCompileHugeMethods
// on by default): such a method runs in the bytecode interpreter.
const jvmHugeMethod = 8000

// checkCodegen refuses a plan whose generated code Spark would abandon: a
// method past spark.sql.codegen.hugeMethodLimit makes Spark drop
// whole-stage code generation for the subtree and evaluate it another way,
// with a log line at INFO level only. The session also sets
// spark.sql.codegen.fallback=false, so code that fails to compile fails
// the query instead of falling back to interpreted evaluation.
func checkCodegen(a *sparkAnswer) error {
	if a.HugeLimit > 0 && a.MaxMethod > a.HugeLimit {
		return fmt.Errorf("spark: a generated method of %d bytes passes spark.sql.codegen.hugeMethodLimit (%d): Spark would drop whole-stage code generation for the plan", a.MaxMethod, a.HugeLimit)
	}
	return nil
}

// codegenNote says how large the largest generated method was, that
// HotSpot interprets it when it passes jvmHugeMethod, or that whole-stage
// code generation failed and the plan ran without it.
func codegenNote(a *sparkAnswer) string {
	switch {
	case a.WSCGOff != "":
		return "; whole-stage code generation failed (" + a.WSCGOff + "): ran with spark.sql.codegen.wholeStage=false, each expression compiled alone"
	case a.MaxMethod > jvmHugeMethod:
		return fmt.Sprintf("; largest generated method %d bytes, past HotSpot's %d-byte JIT limit: it runs interpreted", a.MaxMethod, jvmHugeMethod)
	}
	return fmt.Sprintf("; largest generated method %d bytes", a.MaxMethod)
}

// Score implements Runner.
func (r sparkRunner) Score(ctx context.Context, p *compile.Program, layout, variant string, rows *forest.Rows, dir string) (*Result, error) {
	if err := r.declines(p, layout, variant); err != nil {
		return nil, err
	}
	if variant == functionVariant {
		return r.scoreSparkFunction(ctx, p, layout, rows, dir)
	}
	python, chosen := r.python, r.python != ""
	if python == "" {
		var err error
		if python, chosen, err = SparkPython(); err != nil {
			return nil, err
		}
	}
	o, err := r.options(p, layout, variant, "")
	if err != nil {
		return nil, err
	}
	files, err := sqltarget.Emit(p, o)
	if err != nil {
		return nil, err
	}
	if dir != "" {
		if err := os.WriteFile(filepath.Join(dir, files[0].Name), files[0].Data, 0o644); err != nil {
			return nil, err
		}
	}
	req, twins := sparkRows(p, o, rows)
	req.SQL = strings.TrimSuffix(strings.TrimSpace(string(files[0].Data)), ";")
	req.Outputs, req.Label, req.ANSI = p.NumOutputs, p.IsClassifier(), !r.ansiOff
	a, version, err := askSpark(ctx, python, req)
	if err != nil {
		if !chosen && strings.Contains(err.Error(), "did not start") {
			return nil, fmt.Errorf("%w: %v", ErrSkip, err)
		}
		return nil, err
	}
	if !a.OK {
		return nil, fmt.Errorf("spark: run: %v", errors.New(a.Error))
	}
	if err := checkCodegen(a); err != nil {
		return nil, err
	}
	res, err := sparkResult(p, a, rows.Len(), twins)
	if err != nil {
		return nil, err
	}
	res.Build = time.Duration((a.PlanMS + a.CodegenMS) * float64(time.Millisecond))
	res.Run = time.Duration(a.RunMS * float64(time.Millisecond))
	ansi := "on"
	if r.ansiOff {
		ansi = "off"
	}
	res.Toolchain = fmt.Sprintf("Spark %s, local mode through PySpark (%s), spark.sql.ansi.enabled %s%s", version, python, ansi, codegenNote(a))
	return res, nil
}

// sparkRows is the table of rows as the driver reads it: the row number,
// then each used feature's bits, NULL for NaN; then a copy of every row
// holding a missing value with NaN stored instead (numbered from
// rows.Len() on). twins lists those rows.
func sparkRows(p *compile.Program, o sqltarget.Options, rows *forest.Rows) (req *sparkRequest, twins []int) {
	used := p.UsedFeatures()
	req = &sparkRequest{Table: "`" + strings.ReplaceAll(o.Table, "`", "``") + "`", Columns: []string{o.Keep[0]}}
	for _, i := range used {
		name := p.Features[i].Name
		if o.Columns != nil {
			name = o.Columns[i]
		}
		req.Columns = append(req.Columns, name)
	}
	row := func(id, r int, nan bool) []any {
		x := rows.Row(r)
		vals := []any{id}
		for _, i := range used {
			switch {
			case !math.IsNaN(x[i]):
				vals = append(vals, fmt.Sprintf("%016x", math.Float64bits(x[i])))
			case nan:
				vals = append(vals, fmt.Sprintf("%016x", math.Float64bits(math.NaN())))
			default:
				vals = append(vals, nil)
			}
		}
		return vals
	}
	for r := 0; r < rows.Len(); r++ {
		req.Rows = append(req.Rows, row(r, r, false))
		for _, i := range used {
			if math.IsNaN(rows.Row(r)[i]) {
				twins = append(twins, r)
				break
			}
		}
	}
	for t, r := range twins {
		req.Rows = append(req.Rows, row(rows.Len()+t, r, true))
	}
	return req, twins
}

// sparkResult reads the driver's rows into a Result through the collector
// the other SQL runners use (every row once; NaN twins as their rows).
func sparkResult(p *compile.Program, a *sparkAnswer, n int, twins []int) (*Result, error) {
	c := newCollector(p, n, twins, "spark")
	vals := make([]dbsql.NullFloat64, p.NumOutputs)
	for _, row := range a.Rows {
		if len(row) != 1+p.NumOutputs+boolInt(p.IsClassifier()) {
			return nil, fmt.Errorf("spark: a result row has %d columns", len(row))
		}
		id, ok := row[0].(float64)
		if !ok {
			return nil, fmt.Errorf("spark: result row number %v is not a number", row[0])
		}
		for j := range vals {
			vals[j] = dbsql.NullFloat64{}
			if s, ok := row[1+j].(string); ok {
				b, err := strconv.ParseUint(s, 16, 64)
				if err != nil {
					return nil, fmt.Errorf("spark: row %d, output %d: %q is not hex bits", int(id), j, s)
				}
				vals[j] = dbsql.NullFloat64{Float64: math.Float64frombits(b), Valid: true}
			}
		}
		var label dbsql.NullString
		if p.IsClassifier() {
			if s, ok := row[len(row)-1].(string); ok {
				label = dbsql.NullString{String: s, Valid: true}
			}
		}
		if err := c.add(int64(id), vals, label); err != nil {
			return nil, err
		}
	}
	return c.finish()
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}

// SparkRun is what SparkExec measured.
type SparkRun struct {
	Rows                 [][]any // doubles as the hex of their bits
	Setup, Plan, Run     time.Duration
	Version              string
	MaxMethod, HugeLimit int
	// Note says how Spark generated code (see codegenNote).
	Note string
}

// SparkExec runs setup statements and then query in the spark runner's
// session under python ("" for SparkPython()), for benchmarks over tables
// Spark makes itself: Plan is analysis, optimisation and physical
// planning, Run the execution and collection of the result.
func SparkExec(ctx context.Context, python string, setup []string, query string) (*SparkRun, error) {
	if python == "" {
		var err error
		if python, _, err = SparkPython(); err != nil {
			return nil, err
		}
	}
	a, version, err := askSpark(ctx, python, &sparkRequest{Op: "exec", Setup: setup, SQL: query, ANSI: true})
	if err != nil {
		return nil, err
	}
	if !a.OK {
		return nil, fmt.Errorf("spark: %v", errors.New(a.Error))
	}
	ms := func(v float64) time.Duration { return time.Duration(v * float64(time.Millisecond)) }
	return &SparkRun{Rows: a.Rows, Setup: ms(a.SetupMS), Plan: ms(a.PlanMS), Run: ms(a.RunMS), Version: version, MaxMethod: a.MaxMethod, HugeLimit: a.HugeLimit, Note: codegenNote(a)}, nil
}
