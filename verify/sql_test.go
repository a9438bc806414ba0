package verify

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"slices"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/internal/randmodel"
	"github.com/sawmill-dev/sawmill/internal/testenv"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// The SQL runners' own tests: what the golden cases do not reach (deep
// trees, stage splitting, small nesting budgets, views, name errors) and the
// engine facts the emitter relies on (literal read-back, EXP).
//
// CASE, NULL and delimited identifiers follow ISO/IEC 9075:2016 (SQL:2016)
// in all three engines: a NULL operand makes a comparison unknown, CASE
// takes ELSE on unknown, and "" inside a delimited identifier is one
// double quote. Departures the tests rely on, and say so where they do:
// SQLite and DuckDB compare even delimited identifiers without regard to
// ASCII case, and PostgreSQL truncates identifiers to 63 bytes and reads
// 1.5e0 as numeric, not as an approximate numeric.

var sqlEngineRunners = []sqlRunner{{engine: "sqlite"}, {engine: "duckdb"}, {engine: "postgres"}}

// sqlSession opens the engine or skips the test plainly when it is absent.
func sqlSession(t *testing.T, r sqlRunner) *sqlDB {
	t.Helper()
	db, err := r.open(context.Background(), "")
	if errors.Is(err, ErrSkip) {
		testenv.Need(t, fmt.Errorf("%s: %w", r.engine, err))
	}
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(db.close)
	return db
}

// hardDoubles are values whose decimal spelling is easy to get wrong: the
// smallest subnormal 2^-1074, the largest subnormal, the smallest normal,
// 17-significant-digit values, the largest double, powers of ten that are
// not exact, integers beyond 2^53 and -0.
var hardDoubles = []float64{
	0x1p-1074, -0x1p-1074, 0x1.fffffffffffffp-1023, 0x1p-1022, 2.2250738585072009e-308,
	0.1, 0.2, 0.30000000000000004, 1.0000000000000002, 0.9999999999999999,
	123456789.12345679, 9007199254740993, 9007199254740992, 1e22, 1e23, 5e-324,
	1.7976931348623157e308, -1.7976931348623157e308, 9.999999999999999e307, 1e308,
	8.98846567431158e307, 3, 100, 1, 0, math.Copysign(0, -1), -2.5, 1.5e-300, 4.940656458412465e-324,
	2.9802322387695312e-08, 0.1 + 0.2, 1.0 / 3, 2.0 / 3, math.Pi, math.E, -math.MaxInt64, 1 << 62,
}

// TestSQLLiterals checks that every engine reads each dialect's spelling of
// the hard values back as the very same double, typed as a double (a sum of
// two literals rounds like a float64 sum, where DECIMAL or numeric would be
// exact).
func TestSQLLiterals(t *testing.T) {
	for _, r := range sqlEngineRunners {
		t.Run(r.engine, func(t *testing.T) {
			db := sqlSession(t, r)
			ctx := context.Background()
			for _, d := range []sqltarget.Dialect{r.dialect(""), sqltarget.ANSI} {
				bad := 0
				for _, v := range hardDoubles {
					lit := d.Literal(v)
					var got float64
					if err := db.conn.QueryRowContext(ctx, "SELECT "+lit).Scan(&got); err != nil {
						t.Fatalf("%s: SELECT %s: %v", d, lit, err)
					}
					if math.Float64bits(got) != math.Float64bits(v) {
						t.Errorf("%s: %s read back as %v (%#x), want %v (%#x)", d, lit, got, math.Float64bits(got), v, math.Float64bits(v))
						bad++
					}
				}
				// 0.1 + 0.2 is 0.30000000000000004 in double arithmetic and
				// 0.3 in exact decimal arithmetic.
				var sum float64
				a, b := 0.1, 0.2 // variables: Go adds constants exactly
				q := "SELECT " + d.Literal(a) + " + " + d.Literal(b)
				if err := db.conn.QueryRowContext(ctx, q).Scan(&sum); err != nil {
					t.Fatal(err)
				}
				if sum != a+b {
					t.Errorf("%s: %s = %v: the literals are not doubles", d, q, sum)
				}
				// -0 survives a sum whose every term is -0.
				nz := d.Literal(math.Copysign(0, -1))
				q = "SELECT " + nz + " + " + nz
				if err := db.conn.QueryRowContext(ctx, q).Scan(&sum); err != nil {
					t.Fatal(err)
				}
				if !math.Signbit(sum) {
					t.Errorf("%s: %s = +0, want -0", d, q)
				}
				t.Logf("%s: %d values read back exactly", d, len(hardDoubles)-bad)
			}
		})
	}
}

// TestSQLExp measures each engine's EXP against Go's math.Exp, the
// interpreter's: they must agree within one ulp (the runner's tolerance
// for transformed outputs rests on it). MySQL/MariaDB included (its EXP
// raises an error past 709.78, outside the arguments here).
func TestSQLExp(t *testing.T) {
	var xs []float64
	for i := -2000; i <= 2000; i++ {
		xs = append(xs, float64(i)*0.0173, float64(i)*0.35+0.001)
	}
	for _, r := range append(sqlEngineRunners, sqlRunner{engine: "mysql"}) {
		t.Run(r.engine, func(t *testing.T) {
			db := sqlSession(t, r)
			d := r.dialect("")
			differ := 0
			for a := 0; a < len(xs); a += 400 {
				var parts []string
				for _, x := range xs[a:min(a+400, len(xs))] {
					parts = append(parts, "EXP("+d.Literal(x)+")")
				}
				rows, err := db.conn.QueryContext(context.Background(), "SELECT "+strings.Join(parts, ", "))
				if err != nil {
					t.Fatal(err)
				}
				vals := make([]float64, len(parts))
				dest := make([]any, len(parts))
				for i := range vals {
					dest[i] = &vals[i]
				}
				if !rows.Next() {
					t.Fatal("no row")
				}
				if err := rows.Scan(dest...); err != nil {
					t.Fatal(err)
				}
				rows.Close()
				for i, v := range vals {
					w := math.Exp(xs[a+i])
					if v == w {
						continue
					}
					differ++
					if ulps := math.Abs(float64(int64(math.Float64bits(v)) - int64(math.Float64bits(w)))); ulps > 1 {
						t.Errorf("EXP(%v) = %v, math.Exp gives %v: %v ulps apart", xs[a+i], v, w, ulps)
					}
				}
			}
			t.Logf("EXP differs from math.Exp by one ulp on %d of %d arguments in (-700, 700)", differ, len(xs))
		})
	}
}

// tree builders for hand-made forests.

// chainTree is a path of depth splits on feature f at thresholds 0, 1, 2…:
// at split i a row with x <= i leaves to a leaf of value i (missing values
// go left at odd depths), the last split's right child is leaf -1.
func chainTree(depth, f int) forest.Tree {
	var t forest.Tree
	for i := 0; i < depth; i++ {
		split := len(t.Left)
		t.Feature = append(t.Feature, f, -1)
		t.Threshold = append(t.Threshold, float64(i), 0)
		t.Left = append(t.Left, split+1, -1)
		t.Right = append(t.Right, split+2, -1)
		t.MissingLeft = append(t.MissingLeft, i%2 == 1, false)
		t.Value = append(t.Value, 0, float64(i)+0.5)
	}
	t.Feature = append(t.Feature, -1)
	t.Threshold = append(t.Threshold, 0)
	t.Left = append(t.Left, -1)
	t.Right = append(t.Right, -1)
	t.MissingLeft = append(t.MissingLeft, false)
	t.Value = append(t.Value, -1)
	return t
}

// balancedTree is a full tree of the given depth over nf features, with
// thresholds and k-vector leaves drawn from seed; leaf values are spread
// over many magnitudes so that the order of additions shows.
func balancedTree(depth, nf, k int, seed uint64) forest.Tree {
	var t forest.Tree
	s := seed*0x9e3779b97f4a7c15 + 1
	next := func() float64 {
		s ^= s << 13
		s ^= s >> 7
		s ^= s << 17
		return float64(s>>11) / (1 << 53)
	}
	type item struct{ id, depth int }
	n := 1<<(depth+1) - 1
	t.Feature = make([]int, n)
	t.Threshold = make([]float64, n)
	t.Left = make([]int, n)
	t.Right = make([]int, n)
	t.MissingLeft = make([]bool, n)
	t.Value = make([]float64, n*k)
	for i := 0; i < n; i++ {
		if 2*i+1 < n {
			t.Feature[i] = int(next() * float64(nf))
			t.Threshold[i] = math.Round((next()*4-2)*8) / 8
			t.Left[i], t.Right[i] = 2*i+1, 2*i+2
			t.MissingLeft[i] = next() < 0.5
			continue
		}
		t.Feature[i], t.Left[i], t.Right[i] = -1, -1, -1
		for j := 0; j < k; j++ {
			t.Value[i*k+j] = (next() - 0.3) * math.Pow(10, math.Round(next()*12-6))
		}
	}
	return t
}

func sqlProgram(t *testing.T, f *forest.Forest) *compile.Program {
	t.Helper()
	if err := f.Validate("model"); err != nil {
		t.Fatal(err)
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// sqlCheck scores p's rows in every engine, in each dialect (the engine's
// own and ANSI) with o's other settings, and holds every output against the
// interpreter.
func sqlCheck(t *testing.T, f *forest.Forest, rows *forest.Rows, o sqltarget.Options) {
	t.Helper()
	sqlCheckVariants(t, f, rows, o, allSQLVariants)
}

// allSQLVariants are the engines' own and ANSI text, each also run in the
// sqlite3 shell (by the sqlite runner alone).
var allSQLVariants = []string{"", "ansi", "shell", "ansi-shell"}

func sqlCheckVariants(t *testing.T, f *forest.Forest, rows *forest.Rows, o sqltarget.Options, variants []string, extra ...sqlRunner) {
	t.Helper()
	p := sqlProgram(t, f)
	c := &goldencase.Case{Model: f, Rows: rows}
	want, wantCls := c.Reference()
	for _, r := range append(slices.Clone(sqlEngineRunners), extra...) {
		for _, variant := range variants {
			if isShell(variant) && r.engine != "sqlite" {
				continue
			}
			name := r.engine
			if variant != "" {
				name += "-" + variant
			}
			t.Run(name, func(t *testing.T) {
				res, err := r.score(context.Background(), p, rows, t.TempDir(), isShell(variant), func(schema string) (sqltarget.Options, error) {
					oo := o
					oo.Dialect = r.dialect(variant)
					oo.Table, oo.Schema = sqlTable, schema
					oo.Keep = append([]string{rowColumn(p)}, o.Keep...)
					return oo, nil
				})
				if errors.Is(err, ErrSkip) {
					testenv.Need(t, err)
				}
				if err != nil {
					t.Fatal(err)
				}
				exact, bound := r.Tolerance(variant, p)
				m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound)
				if !m.OK() {
					t.Fatal(m)
				}
				t.Logf("%s; prepare %v, run %v", m, res.Build.Round(1e5), res.Run.Round(1e5))
			})
		}
	}
}

// TestSQLDeepTree: a 600-deep tree exceeds every dialect's default CASE
// nesting, so auto picks the table layout and walks it in stages; the
// nested layout refuses it with a hint. A 300-deep tree runs nested when
// allowed to nest 400 deep (SQLite 3.54 accepts about 498 levels of CASE,
// DuckDB 992, PostgreSQL 1,999; measured).
func TestSQLDeepTree(t *testing.T) {
	deep := func(d int) (*forest.Forest, *forest.Rows) {
		f := &forest.Forest{Task: forest.Regression, Features: []string{"depth"}, InputPrecision: forest.Float64,
			Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0.25},
			Trees: []forest.Tree{chainTree(d, 0), chainTree(7, 0)}}
		rows := randmodel.RandomRows(3, f, 40)
		for i := 0; i < d+10; i += 3 { // every third leaf, and the thresholds themselves
			rows.Values = append(rows.Values, float64(i)-0.5, float64(i))
			rows.Line = append(rows.Line, 0, 0)
		}
		return f, rows
	}
	f, rows := deep(600)
	p := sqlProgram(t, f)
	for _, d := range sqltarget.Dialects {
		if l, _, _ := sqltarget.Resolve(p, sqltarget.Options{Dialect: d}); l != emit.Table {
			t.Fatalf("%s: auto picked %s for a 600-deep tree", d, l)
		}
	}
	_, err := sqltarget.Emit(p, sqltarget.Options{Dialect: sqltarget.SQLite, Layout: emit.Nested})
	if err == nil || !strings.Contains(err.Error(), "600 splits deep") || !strings.Contains(err.Error(), "hint:") {
		t.Fatalf("nested layout of a 600-deep tree: error %v", err)
	}
	t.Run("auto", func(t *testing.T) { sqlCheck(t, f, rows, sqltarget.Options{}) })
	// 150 descent stages: in ANSI text, which cannot ask for MATERIALIZED,
	// SQLite counts the fenced sub-queries into its expression depth limit
	// (1000) and refuses, so only the engines' own dialects run this.
	t.Run("table-nest5", func(t *testing.T) {
		sqlCheckVariants(t, f, rows, sqltarget.Options{Layout: emit.Table, MaxNest: 5}, []string{"", "shell"})
	})
	f, rows = deep(300)
	// Not in the stock sqlite3 shell, whose parser stops near 15
	// (TestSQLiteShellLimits).
	t.Run("nested400", func(t *testing.T) {
		sqlCheckVariants(t, f, rows, sqltarget.Options{Layout: emit.Nested, MaxNest: 400}, []string{"", "ansi"})
	})
}

// TestSQLStages splits the sum over many sub-queries (two trees each) and
// the descent over many small stages (MaxNest 2 and 3: binary search with
// no levels left falls back to a simple CASE), for Sum, Average, softmax
// and logistic models; the additions must stay in tree order.
func TestSQLStages(t *testing.T) {
	features := []string{"vibration_rms", "bearing_temp_c", "motor_current_a", "flow_m3h", "suction_pressure_kpa"}
	classes := []string{"healthy", "cavitation", "bearing_wear", "misalignment"}
	var trees4, trees1 []forest.Tree
	for i := 0; i < 9; i++ {
		trees4 = append(trees4, balancedTree(1+i%6, len(features), 4, uint64(i)))
		trees1 = append(trees1, balancedTree(1+i%6, len(features), 1, uint64(i+50)))
	}
	models := map[string]*forest.Forest{
		"sum-regression": {Task: forest.Regression, Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{-3.5}, Trees: trees1},
		"average-4":      {Task: forest.Classification, Classes: classes, Combine: forest.Average, Transform: forest.NoTransform, BaseScore: []float64{0, 0.5, 0, 1e-9}, Trees: trees4},
		"softmax-4":      {Task: forest.Classification, Classes: classes, Combine: forest.Sum, Transform: forest.Softmax, BaseScore: []float64{0.1, 0.2, 0.3, 0.4}, Trees: trees4},
		"logistic":       {Task: forest.Classification, Classes: classes[:2], Combine: forest.Sum, Transform: forest.Logistic, BaseScore: []float64{0.1}, Trees: trees1},
	}
	for _, name := range []string{"sum-regression", "average-4", "softmax-4", "logistic"} {
		f := models[name]
		f.Features, f.InputPrecision = features, forest.Float64
		rows := randmodel.RandomRows(7, f, 120)
		for _, o := range []sqltarget.Options{
			{Layout: emit.Nested, TreesPerStage: 2},
			{Layout: emit.Table, TreesPerStage: 2, MaxNest: 2},
			{Layout: emit.Table, TreesPerStage: 4, MaxNest: 3},
		} {
			t.Run(fmt.Sprintf("%s/%s-stage%d-nest%d", name, o.Layout, o.TreesPerStage, o.MaxNest), func(t *testing.T) {
				sqlCheck(t, f, rows, o)
			})
		}
	}
}

// TestSQLNegativeZero: with base score -0 and every leaf -0, the sum is -0
// (IEEE 754: -0 + -0 = -0), and every engine must return -0.
func TestSQLNegativeZero(t *testing.T) {
	nz := math.Copysign(0, -1)
	tr := forest.Tree{Feature: []int{0, -1, -1}, Threshold: []float64{nz, 0, 0}, Left: []int{1, -1, -1}, Right: []int{2, -1, -1},
		MissingLeft: []bool{true, false, false}, Value: []float64{0, nz, nz}}
	f := &forest.Forest{Task: forest.Regression, Features: []string{"x"}, InputPrecision: forest.Float64,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{nz}, Trees: []forest.Tree{tr, tr}}
	rows := randmodel.RandomRows(5, f, 30)
	for _, l := range []string{emit.Nested, emit.Table} {
		t.Run(l, func(t *testing.T) { sqlCheck(t, f, rows, sqltarget.Options{Layout: l}) })
	}
}

// TestSQLViewAndKeep creates a view with a hostile name and hostile kept
// columns, and reads the scores back from it.
func TestSQLViewAndKeep(t *testing.T) {
	f := &forest.Forest{Task: forest.Classification, Features: []string{"DROP TABLE t;--", `"`, `back\slash`},
		Classes: []string{"it's", `say "x"`, `a\b`}, InputPrecision: forest.Float64, Combine: forest.Average,
		Transform: forest.NoTransform, BaseScore: []float64{0, 0, 0},
		Trees: []forest.Tree{balancedTree(3, 3, 3, 1), balancedTree(2, 3, 3, 2)}}
	rows := randmodel.RandomRows(9, f, 50)
	sqlCheck(t, f, rows, sqltarget.Options{View: `v'); DROP VIEW x; --"`, Keep: []string{`"`, "DROP TABLE t;--"}})
}

// TestSQLNameErrors: names no engine can hold are refused with a message
// that says why, wrapping ErrNames; names that differ only in case are
// refused where the dialect folds case (SQLite, DuckDB, MySQL, Spark) and accepted where
// it does not (PostgreSQL, ANSI).
func TestSQLNameErrors(t *testing.T) {
	f := &forest.Forest{Task: forest.Regression, Features: []string{"a", "A"}, InputPrecision: forest.Float64,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0},
		Trees: []forest.Tree{balancedTree(3, 2, 1, 4)}}
	p := sqlProgram(t, f)
	for _, d := range sqltarget.Dialects {
		_, err := sqltarget.Emit(p, sqltarget.Options{Dialect: d})
		folds := d == sqltarget.SQLite || d == sqltarget.DuckDB || d == sqltarget.MySQL || d == sqltarget.Spark
		if folds != (err != nil) || err != nil && (!errors.Is(err, sqltarget.ErrNames) || !strings.Contains(err.Error(), "same column")) {
			t.Errorf("%s: features a and A: error %v", d, err)
		}
	}
	f.Features = []string{"nul\x00byte", "b"}
	p = sqlProgram(t, f)
	_, err := sqltarget.Emit(p, sqltarget.Options{Dialect: sqltarget.Postgres})
	if err == nil || !errors.Is(err, sqltarget.ErrNames) || !strings.Contains(err.Error(), "NUL byte") {
		t.Errorf("feature with a NUL byte: error %v", err)
	}
	f.Features = []string{"a", "b"}
	p = sqlProgram(t, f)
	_, err = sqltarget.Emit(p, sqltarget.Options{Keep: []string{"prediction"}})
	if err == nil || !strings.Contains(err.Error(), "clash") {
		t.Errorf("kept column named like the output: error %v", err)
	}
	if _, err := sqltarget.Emit(p, sqltarget.Options{Dialect: "oracle"}); err == nil || !strings.Contains(err.Error(), "hint:") {
		t.Errorf("unknown dialect: error %v", err)
	}
}

// TestSQLBigForest (SAWMILL_SQL_BIG=1, which CI sets; about a minute,
// not part of the default run) scores a 500-tree forest of 2,047-node trees with distinct
// thresholds, plus a 300-deep tree, in every engine through the auto
// layout, and prints prepare and run times.
func TestSQLBigForest(t *testing.T) {
	if os.Getenv("SAWMILL_SQL_BIG") == "" {
		t.Skip("set SAWMILL_SQL_BIG=1 to score the 500-tree, 1M-node forest in every engine (minutes)")
	}
	nf := 12
	var features []string
	for i := 0; i < nf; i++ {
		features = append(features, fmt.Sprintf("sensor_%d", i))
	}
	var trees []forest.Tree
	for i := 0; i < 500; i++ {
		tr := balancedTree(10, nf, 1, uint64(i+1000))
		for j := range tr.Threshold { // distinct thresholds, as a trained forest on varied data has
			if tr.Left[j] != -1 {
				tr.Threshold[j] += float64(i*2048+j) * 1e-7
			}
		}
		trees = append(trees, tr)
	}
	trees = append(trees, chainTree(300, 0))
	f := &forest.Forest{Task: forest.Regression, Features: features, InputPrecision: forest.Float64,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0.5}, Trees: trees}
	rows := randmodel.RandomRows(11, f, 200)
	t.Logf("%d trees, %d nodes", len(trees), sqlProgram(t, f).NumNodes())
	sqlCheckVariants(t, f, rows, sqltarget.Options{}, []string{"", "shell"}, sqlRunner{engine: "mysql"})
}
