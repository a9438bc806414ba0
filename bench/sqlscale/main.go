// Command sqlscale scores many rows with one statement in Spark (local
// mode), DuckDB and PostgreSQL side by side and prints rows per second,
// plan time and the ratios. The forest is grown by sawmill on the Breast
// Cancer Wisconsin (Diagnostic) data (W. H. Wolberg, W. N. Street, O. L.
// Mangasarian, UCI Machine Learning Repository, 1995, as shipped with
// scikit-learn), as bench/sql grows it.
//
//	SAWMILL_SPARK_PYTHON=.venv/bin/python SAWMILL_POSTGRES_DSN=postgres://postgres@127.0.0.1:5432/test?sslmode=disable \
//	  go run -tags duckdb ./bench/sqlscale -trees 500 -rows 10000000
//
// -engine-rows gives an engine that would take too long another row count
// (spark=20000,postgres=100000); rows per second is what is compared, and
// each line prints its rows and the machine's load average.
//
// Rows are made inside each engine from the row number (so no engine's
// load path is timed): feature j of row i is lo_j + span_j * (((i*a_j +
// b_j) mod 1000003) / 1000003), integer arithmetic and then three IEEE
// double operations, which every engine rounds alike, so all engines score
// the same rows. Each engine stores them first (Spark: Parquet files in a
// temporary folder; DuckDB: a database file; PostgreSQL: an unlogged
// table), then runs the emitted statement wrapped in an aggregate (row
// count, each output's sum, the rows of each label), timed apart from the
// load. The aggregates are held against the interpreter's over the same
// rows (sums within 1e-9 relative: the engines add in parallel, in their
// own order); every row is held bit for bit by sawmill verify and the
// golden cases, not here. On a cluster the same statement runs unchanged;
// only the table's partitions differ.
package main

import (
	"context"
	dbsql "database/sql"
	"errors"
	"flag"
	"fmt"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"time"

	_ "github.com/jackc/pgx/v5/stdlib" // database/sql driver "pgx"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
	"github.com/sawmill-dev/sawmill/verify"
)

func main() {
	data := flag.String("data", "golden/testdata/sklearn-breast-cancer/data.csv", "training CSV (label column \"label\")")
	trees := flag.Int("trees", 500, "trees to grow")
	nrows := flag.Int("rows", 1000000, "rows to score")
	engineRows := flag.String("engine-rows", "", "rows for some engines instead of -rows, as engine=rows,... (for an engine that would take too long on -rows; rows/s is what is compared)")
	engines := flag.String("engines", "spark,duckdb,postgres", "engines to run")
	check := flag.Bool("check", true, "hold the aggregates against the interpreter (slow past a few million rows)")
	flag.Parse()
	rows, err := rowsPerEngine(strings.Split(*engines, ","), *nrows, *engineRows)
	if err == nil {
		err = run(*data, *trees, rows, *check)
	}
	if err != nil {
		fmt.Fprintln(os.Stderr, "sqlscale:", err)
		os.Exit(1)
	}
}

// engineRun is one engine and the rows it scores.
type engineRun struct {
	name string
	rows int
}

// rowsPerEngine pairs each engine with n rows, or with the count that
// spec (engine=rows,...) gives it.
func rowsPerEngine(engines []string, n int, spec string) ([]engineRun, error) {
	counts := map[string]int{}
	for _, kv := range strings.Split(spec, ",") {
		if kv == "" {
			continue
		}
		name, v, ok := strings.Cut(kv, "=")
		c, err := strconv.Atoi(v)
		if !ok || err != nil || c <= 0 {
			return nil, fmt.Errorf("-engine-rows: %q is not engine=rows with rows a positive whole number", kv)
		}
		if !slices.Contains(engines, name) {
			return nil, fmt.Errorf("-engine-rows: %q is not one of the engines run (%s)", name, strings.Join(engines, ","))
		}
		counts[name] = c
	}
	var runs []engineRun
	for _, e := range engines {
		r := engineRun{e, n}
		if c, ok := counts[e]; ok {
			r.rows = c
		}
		runs = append(runs, r)
	}
	return runs, nil
}

// bench is what one engine measured.
type bench struct {
	load, plan, run time.Duration
	agg             []float64 // count, each output's sum, each label's count
	note            string
	rows            int
}

// rate is the rows scored a second.
func (b *bench) rate() float64 { return float64(b.rows) / b.run.Seconds() }

func run(path string, trees int, engines []engineRun, check bool) error {
	d, err := train.ReadCSVFile(path, train.ReadOptions{Label: "label"})
	if err != nil {
		return err
	}
	res, err := train.Train(d, train.Settings{Trees: trees, Seed: 1, SkipImportance: true})
	if err != nil {
		return err
	}
	f := res.Forest
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		return err
	}
	g := newGenerator(d)
	fmt.Printf("forest: %d trees, %d nodes, depth %d; rows of %d features made in each engine\n", len(p.Trees), p.NumNodes(), p.MaxDepth(), len(f.Features))
	want := map[int][]float64{} // the interpreter's aggregates by row count
	fmt.Printf("%-10s %10s %12s %10s %10s %10s %6s  %s\n", "engine", "rows", "rows/s", "plan", "run", "load", "loadav", "notes")
	results := map[string]*bench{}
	for _, e := range engines {
		if _, ok := want[e.rows]; check && !ok {
			start := time.Now()
			want[e.rows] = g.reference(f, p, e.rows)
			fmt.Printf("%-10s %10d %12.0f (one core; the aggregates the engines are held to)\n", "interpreter", e.rows, float64(e.rows)/time.Since(start).Seconds())
		}
		b, err := runEngine(e.name, p, g, e.rows)
		if err != nil {
			fmt.Printf("%-10s %10d not run: %v\n", e.name, e.rows, err)
			continue
		}
		b.rows = e.rows
		if w := want[e.rows]; w != nil {
			if err := agree(w, b.agg); err != nil {
				return fmt.Errorf("%s: %v", e.name, err)
			}
		}
		results[e.name] = b
		fmt.Printf("%-10s %10d %12.0f %10v %10v %10v %6s  %s\n", e.name, e.rows, b.rate(), b.plan.Round(time.Millisecond), b.run.Round(time.Millisecond), b.load.Round(time.Millisecond), loadAverage(), b.note)
	}
	if s := results["spark"]; s != nil {
		for _, e := range engines {
			if o := results[e.name]; o != nil && e.name != "spark" {
				fmt.Printf("spark / %s rows per second: %.3f\n", e.name, s.rate()/o.rate())
			}
		}
	}
	return nil
}

// loadAverage is the machine's one-minute load average as the figure is
// printed ("?" where /proc/loadavg cannot be read): the benchmark shares
// its cores, and the figures mean little without it.
func loadAverage() string {
	b, err := os.ReadFile("/proc/loadavg")
	if f := strings.Fields(string(b)); err == nil && len(f) > 0 {
		return f[0]
	}
	return "?"
}

func runEngine(e string, p *compile.Program, g *generator, n int) (*bench, error) {
	switch e {
	case "spark":
		return runSpark(p, g, n)
	case "duckdb":
		if !duckDBLinked {
			return nil, errors.New("DuckDB is linked only under -tags duckdb")
		}
		dir, err := os.MkdirTemp("", "sqlscale")
		if err != nil {
			return nil, err
		}
		defer os.RemoveAll(dir)
		return runDB("duckdb", dir+"/bench.duckdb", sqltarget.DuckDB, p, g, n)
	case "postgres":
		dsn, _ := verify.PostgresDSN()
		return runDB("pgx", dsn, sqltarget.Postgres, p, g, n)
	}
	return nil, fmt.Errorf("unknown engine %q: use spark, duckdb or postgres", e)
}

// statement is the emitted statement for d over table "bench", wrapped in
// the aggregate the engines return.
func statement(p *compile.Program, d sqltarget.Dialect) (string, error) {
	files, err := sqltarget.Emit(p, sqltarget.Options{Dialect: d, Table: "bench"})
	if err != nil {
		return "", err
	}
	stmt := strings.TrimSuffix(strings.TrimSpace(string(files[0].Data)), ";")
	q := func(s string) string {
		if d == sqltarget.Spark {
			return "`" + s + "`"
		}
		return `"` + s + `"`
	}
	items := []string{"COUNT(*)"}
	for _, o := range sqltarget.OutputNames(p) {
		items = append(items, "SUM("+q(o)+")")
	}
	for _, c := range p.Classes {
		items = append(items, "SUM(CASE WHEN "+q("class")+" = '"+c+"' THEN 1 ELSE 0 END)")
	}
	return "SELECT " + strings.Join(items, ", ") + " FROM (\n" + stmt + "\n) s", nil
}

func runSpark(p *compile.Program, g *generator, n int) (*bench, error) {
	query, err := statement(p, sqltarget.Spark)
	if err != nil {
		return nil, err
	}
	dir, err := os.MkdirTemp("", "sqlscale-spark")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	setup := []string{
		fmt.Sprintf("INSERT OVERWRITE DIRECTORY '%s/bench' USING parquet SELECT %s FROM range(%d)", dir, g.columns(sqltarget.Spark, "id"), n),
		fmt.Sprintf("CREATE OR REPLACE TEMPORARY VIEW bench USING parquet OPTIONS (path '%s/bench')", dir),
	}
	r, err := verify.SparkExec(context.Background(), "", setup, query)
	if err != nil {
		return nil, err
	}
	b := &bench{load: r.Setup, plan: r.Plan, run: r.Run,
		note: fmt.Sprintf("Spark %s local mode%s", r.Version, r.Note)}
	for _, v := range r.Rows[0] {
		b.agg = append(b.agg, anyFloat(v))
	}
	return b, nil
}

// anyFloat reads a value of the driver's JSON: a number, or a double's bits
// in hex.
func anyFloat(v any) float64 {
	switch x := v.(type) {
	case float64:
		return x
	case string:
		u, err := strconv.ParseUint(x, 16, 64)
		if err == nil {
			return math.Float64frombits(u)
		}
	}
	return math.NaN()
}

func runDB(driverName, dsn string, d sqltarget.Dialect, p *compile.Program, g *generator, n int) (*bench, error) {
	ctx := context.Background()
	db, err := dbsql.Open(driverName, dsn)
	if err != nil {
		return nil, err
	}
	defer db.Close()
	db.SetMaxOpenConns(1)
	conn, err := db.Conn(ctx)
	if err != nil {
		return nil, err
	}
	defer conn.Close()
	query, err := statement(p, d)
	if err != nil {
		return nil, err
	}
	start := time.Now()
	var setup []string
	if d == sqltarget.Postgres {
		setup = []string{"SET jit = off", "DROP TABLE IF EXISTS bench",
			fmt.Sprintf("CREATE UNLOGGED TABLE bench AS SELECT %s FROM generate_series(0, %d) AS t(id)", g.columns(d, "id"), n-1), "ANALYZE bench"}
	} else {
		setup = []string{fmt.Sprintf("CREATE TABLE bench AS SELECT %s FROM range(%d) AS t(id)", g.columns(d, "id"), n)}
	}
	for _, s := range setup {
		if _, err := conn.ExecContext(ctx, s); err != nil {
			return nil, fmt.Errorf("%s: %v", s[:min(len(s), 60)], err)
		}
	}
	b := &bench{load: time.Since(start)}
	if d == sqltarget.Postgres {
		defer conn.ExecContext(ctx, "DROP TABLE IF EXISTS bench")
	}
	start = time.Now()
	stmt, err := conn.PrepareContext(ctx, query)
	if err != nil {
		return nil, err
	}
	defer stmt.Close()
	b.plan = time.Since(start)
	start = time.Now()
	k := 1 + p.NumOutputs + len(p.Classes)
	vals := make([]float64, k)
	dest := make([]any, k)
	for i := range dest {
		dest[i] = &vals[i]
	}
	if err := stmt.QueryRowContext(ctx).Scan(dest...); err != nil {
		return nil, err
	}
	b.run = time.Since(start)
	b.agg = vals
	var version string
	conn.QueryRowContext(ctx, "SELECT version()").Scan(&version)
	b.note = firstWords(version, 2) + "; plan is the prepare"
	return b, nil
}

func firstWords(s string, n int) string {
	w := strings.Fields(s)
	return strings.Join(w[:min(n, len(w))], " ")
}

// agree holds an engine's aggregates to the interpreter's: counts exactly,
// sums within 1e-9 relative.
func agree(want, got []float64) error {
	if len(got) != len(want) {
		return fmt.Errorf("%d aggregates, want %d", len(got), len(want))
	}
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-9*math.Max(1, math.Abs(want[i])) {
			return fmt.Errorf("aggregate %d is %v, the interpreter's %v", i, got[i], want[i])
		}
	}
	return nil
}

// generator makes row i's features from i alone (see the package doc).
type generator struct {
	lo, span []float64
	names    []string
}

const genMod = 1000003

func newGenerator(d *train.Data) *generator {
	g := &generator{names: d.Features}
	p := len(d.Features)
	for j := 0; j < p; j++ {
		lo, hi := math.Inf(1), math.Inf(-1)
		for i := 0; i < d.Len(); i++ {
			lo, hi = min(lo, d.X[i*p+j]), max(hi, d.X[i*p+j])
		}
		g.lo, g.span = append(g.lo, lo), append(g.span, hi-lo)
	}
	return g
}

func (g *generator) mult(j int) int64 { return 7919 + 2*int64(j)*104729 }
func (g *generator) add(j int) int64  { return 1 + int64(j)*65537 }

// value is feature j of row i, as the engines compute it.
func (g *generator) value(i int64, j int) float64 {
	q := float64((i*g.mult(j)+g.add(j))%genMod) / genMod
	return g.lo[j] + g.span[j]*q
}

// columns is the SELECT list making the features from the row number id.
func (g *generator) columns(d sqltarget.Dialect, id string) string {
	var items []string
	for j, name := range g.names {
		q := fmt.Sprintf("CAST(((CAST(%s AS BIGINT) * %d + %d) %% %d) AS DOUBLE PRECISION) / %s", id, g.mult(j), g.add(j), genMod, d.Literal(genMod))
		quoted := `"` + name + `"`
		if d == sqltarget.Spark {
			q = strings.ReplaceAll(q, "DOUBLE PRECISION", "DOUBLE")
			quoted = "`" + name + "`"
		}
		items = append(items, fmt.Sprintf("%s + %s * (%s) AS %s", d.Literal(g.lo[j]), d.Literal(g.span[j]), q, quoted))
	}
	return strings.Join(items, ", ")
}

// reference is the aggregates the interpreter gives over rows 0 to n-1.
func (g *generator) reference(f *forest.Forest, p *compile.Program, n int) []float64 {
	agg := make([]float64, 1+p.NumOutputs+len(p.Classes))
	x := make([]float64, len(g.names))
	out := make([]float64, p.NumOutputs)
	for i := int64(0); i < int64(n); i++ {
		for j := range x {
			x[j] = g.value(i, j)
		}
		f.Predict(x, out)
		agg[0]++
		for j, v := range out {
			agg[1+j] += v
		}
		if len(p.Classes) > 0 {
			agg[1+p.NumOutputs+f.ClassOf(out)]++
		}
	}
	return agg
}
