package verify

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// The spark runner's own tests: the engine facts spark text relies on
// (literal read-back, strings, EXP at the ends of the range, ANSI mode off)
// and the nested layout, which the golden cases do not run in Spark.
// Reference: PySpark 4.0.1 from python/requirements.txt, local mode, Java 17.

// sparkTestPython returns the Python for Spark or skips plainly (fails
// under SAWMILL_REQUIRE_ENGINES).
func sparkTestPython(t *testing.T) string {
	t.Helper()
	p, _, err := SparkPython()
	if err != nil {
		testenv.Need(t, fmt.Errorf("spark: %w", err))
	}
	return p
}

// sparkSelect runs SELECT sawmill_row, e1 AS o0, e2 AS o1, ... over a
// one-row table and returns the outputs' bits as doubles.
func sparkSelect(t *testing.T, python string, exprs []string, ansi bool) ([]float64, error) {
	t.Helper()
	req := &sparkRequest{Table: "`one`", Columns: []string{"sawmill_row"}, Rows: [][]any{{0}}, Outputs: len(exprs), ANSI: ansi}
	var sel []string
	for i, e := range exprs {
		sel = append(sel, e+" AS o"+strconv.Itoa(i))
	}
	req.SQL = "SELECT sawmill_row, " + strings.Join(sel, ", ") + " FROM `one`"
	a, _, err := askSpark(context.Background(), python, req)
	if err != nil {
		t.Fatal(err)
	}
	if !a.OK {
		return nil, errors.New(a.Error)
	}
	var out []float64
	for _, v := range a.Rows[0][1:] {
		s, ok := v.(string)
		if !ok {
			out = append(out, math.NaN())
			continue
		}
		b, err := strconv.ParseUint(s, 16, 64)
		if err != nil {
			t.Fatal(err)
		}
		out = append(out, math.Float64frombits(b))
	}
	return out, nil
}

// TestSparkLiterals: every spelling of the hard values and of 200 random
// doubles (random bits, so every exponent) reads back as the same double,
// under ANSI mode on and off; a sum of two literals rounds as a double sum
// (a DECIMAL would add exactly).
func TestSparkLiterals(t *testing.T) {
	python := sparkTestPython(t)
	vals := append([]float64(nil), hardDoubles...)
	rng := rand.New(rand.NewPCG(13, 1))
	for len(vals) < len(hardDoubles)+200 {
		v := math.Float64frombits(rng.Uint64())
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			vals = append(vals, v)
		}
	}
	var exprs []string
	for _, v := range vals {
		exprs = append(exprs, sqltarget.Spark.Literal(v))
	}
	exprs = append(exprs, sqltarget.Spark.Literal(0.1)+" + "+sqltarget.Spark.Literal(0.2))
	for _, ansi := range []bool{true, false} {
		got, err := sparkSelect(t, python, exprs, ansi)
		if err != nil {
			t.Fatal(err)
		}
		for i, v := range vals {
			if math.Float64bits(got[i]) != math.Float64bits(v) {
				t.Errorf("ansi %v: %s read back as %v (%#x), want %#x", ansi, exprs[i], got[i], math.Float64bits(got[i]), math.Float64bits(v))
			}
		}
		if sum := got[len(vals)]; sum != 0.30000000000000004 {
			t.Errorf("ansi %v: 0.1 + 0.2 is %v, want the double sum 0.30000000000000004", ansi, sum)
		}
		t.Logf("ansi %v: %d literals read back bit for bit", ansi, len(vals))
	}
}

// TestSparkEngineFacts: what the emitter assumes of Spark, measured.
// EXP overflows to +Inf and underflows to 0 without an error even in ANSI
// mode (which checks integral and decimal arithmetic only), a stored NaN
// is a number to Spark (isnan), and FLOOR of an infinity is a BIGINT far
// from every category.
func TestSparkEngineFacts(t *testing.T) {
	python := sparkTestPython(t)
	got, err := sparkSelect(t, python, []string{
		"EXP(1000D)", "EXP(-1000D)", "1e308D * 10D",
		"CASE WHEN isnan(CAST('NaN' AS DOUBLE)) THEN 1D ELSE 0D END",
		"CASE WHEN CAST('NaN' AS DOUBLE) > 1e308D THEN 1D ELSE 0D END",
		"CAST(FLOOR(CAST('Infinity' AS DOUBLE)) AS DOUBLE)",
		"array(1D, -0e+00D, 3D)[1]",
	}, true)
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{math.Inf(1), 0, math.Inf(1), 1, 1, 0x1p63, math.Copysign(0, -1)}
	for i := range want {
		if math.Float64bits(got[i]) != math.Float64bits(want[i]) {
			t.Errorf("fact %d: got %v, want %v", i, got[i], want[i])
		}
	}
	// Division by zero is an error in ANSI mode, for doubles too: the
	// statement never divides by a value that can be zero (normalize tests
	// the sum first).
	if _, err := sparkSelect(t, python, []string{"1D / 0D"}, true); err == nil || !strings.Contains(err.Error(), "DIVIDE_BY_ZERO") {
		t.Errorf("1D / 0D under ANSI mode: %v, want DIVIDE_BY_ZERO", err)
	}
}

// TestSparkStrings: Spark reads 'a”b' as "ab" (adjacent literals are
// concatenated), so labels with a quote or a backslash are written as
// bytes; they come back as written under ANSI mode on and off.
func TestSparkStrings(t *testing.T) {
	python := sparkTestPython(t)
	labels := []string{"it's", `back\slash`, `\'`, "naïve", "plain"}
	for _, ansi := range []bool{true, false} {
		req := &sparkRequest{Table: "`one`", Columns: []string{"sawmill_row"}, Rows: [][]any{{0}}, Outputs: 0, Label: true, ANSI: ansi}
		for _, l := range labels {
			req.SQL = "SELECT sawmill_row, " + sparkDialectStr(l) + " AS c FROM `one`"
			a, _, err := askSpark(context.Background(), python, req)
			if err != nil {
				t.Fatal(err)
			}
			if !a.OK || a.Rows[0][1] != l {
				t.Errorf("ansi %v: label %q: got %v %s", ansi, l, a.Rows, a.Error)
			}
		}
	}
}

// sparkDialectStr is the spark text literal for s.
func sparkDialectStr(s string) string {
	return sqltarget.SparkString(s)
}

// sparkCases are golden cases the tests below run: names, NaN routing,
// transforms, categories, float32 sums.
var sparkCases = []string{"edge-hostile-names", "edge-nan-routing", "edge-softmax", "v2-normalize", "v2-set-floor", "v2-accumulate32-sum"}

// TestSparkANSIOff runs golden cases with spark.sql.ansi.enabled off (the
// golden runs keep Spark 4's default, on): the text is exact under both.
func TestSparkANSIOff(t *testing.T) {
	sparkCasesThrough(t, sparkRunner{sqlRunner: sqlRunner{engine: "spark"}, ansiOff: true}, emitTable)
}

// TestSparkNested runs golden cases in the nested layout, which the golden
// runs leave out in Spark (see sparkRunner.Layouts).
func TestSparkNested(t *testing.T) {
	sparkCasesThrough(t, sparkRunner{sqlRunner: sqlRunner{engine: "spark"}}, "nested")
}

const emitTable = "table"

func sparkCasesThrough(t *testing.T, r sparkRunner, layout string) {
	r.python = sparkTestPython(t)
	for _, name := range sparkCases {
		t.Run(name, func(t *testing.T) {
			c, err := goldencase.LoadCase(goldenCases+"/"+name, name)
			if err != nil {
				t.Fatal(err)
			}
			p, _, err := compile.Compile(c.Model, r.CompileOptions(""))
			if err != nil {
				t.Fatal(err)
			}
			res, err := r.Score(context.Background(), p, layout, "", c.Rows, "")
			if errors.Is(err, ErrDeclined) {
				t.Skipf("declined: %v", err)
			}
			if err != nil {
				t.Fatal(err)
			}
			want, wantCls := c.ReferenceFor(r, "")
			exact, bound := r.Tolerance("", p)
			if m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound); !m.OK() {
				t.Fatal(m)
			}
			t.Log(res.Toolchain)
		})
	}
}

// TestSparkStagesKeptApart: Spark's optimizer keeps the table layout's
// stages apart (the guarded lookup refers to each leaf number twice, see
// sqltarget's sparkArrayLookup), so no generated method holds more than
// one stage's trees. Unguarded, CollapseProject merged the sums of every
// stage into one expression, and a 500-tree forest's code generation
// overflowed the stack (docs/spark-limits.md). Golden case
// sklearn-breast-cancer: 30 trees of binary votes, 5 trees a stage. Spark
// still inlines a stage's lookups and sum into the next stage's descent
// (the running sum is used once there), so each stage of trees is one
// projection: measured 10 for the 6 stages (with the input, the last
// lookup, the votes and the result), where unguarded the sums of all the
// trees were one.
func TestSparkStagesKeptApart(t *testing.T) {
	python := sparkTestPython(t)
	c, err := goldencase.LoadCase(goldenCases+"/sklearn-breast-cancer", "sklearn-breast-cancer")
	if err != nil {
		t.Fatal(err)
	}
	p, _, err := compile.Compile(c.Model, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	const perStage = 5
	o := sqltarget.Options{Dialect: sqltarget.Spark, Table: sqlTable, Keep: []string{rowColumn(p)}, Layout: emitTable, TreesPerStage: perStage}
	files, err := sqltarget.Emit(p, o)
	if err != nil {
		t.Fatal(err)
	}
	req, _ := sparkRows(p, o, c.Rows)
	req.SQL = strings.TrimSuffix(strings.TrimSpace(string(files[0].Data)), ";")
	req.Outputs, req.Label, req.ANSI = p.NumOutputs, p.IsClassifier(), true
	a, _, err := askSpark(context.Background(), python, req)
	if err != nil {
		t.Fatal(err)
	}
	if !a.OK {
		t.Fatal(a.Error)
	}
	if groups := len(p.Trees) / perStage; a.Projections < groups+2 {
		t.Errorf("the optimized plan has %d projections for %d stages of %d trees: Spark merged stages", a.Projections, groups, perStage)
	}
	t.Logf("%d trees, %d a stage: %d projections in the optimized plan%s", len(p.Trees), perStage, a.Projections, codegenNote(a))
}
