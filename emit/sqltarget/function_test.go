package sqltarget

import (
	"errors"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// TestFunctionNames: one function for a single regression output, else
// one per output and, for a classifier, the bare name for the label.
func TestFunctionNames(t *testing.T) {
	require.Equal(t, []string{"f_0", "f_1", "f_2", "f"}, FunctionNames(classifier(t, 3, true), "f"))
	require.Equal(t, []string{"f"}, FunctionNames(stumpRegression(t, forest.NoTransform, 1), "f"))
}

// TestFunctionRefusals: dialects without SQL-bodied functions, too many
// outputs, kept columns, and a mysql nesting past the bound are refused
// with errors that say why.
func TestFunctionRefusals(t *testing.T) {
	p := classifier(t, 3, true)
	for _, d := range []Dialect{SQLite, ANSI} {
		_, err := Emit(p, Options{Dialect: d, Function: "f"})
		require.True(t, errors.Is(err, ErrNoFunctions), "%s: %v", d, err)
		require.ErrorContains(t, err, string(d)+" has no SQL-bodied scalar functions")
		require.ErrorContains(t, err, "emit the query instead")
	}
	_, err := Emit(classifier(t, MaxFunctionOutputs+1, true), Options{Dialect: Postgres, Function: "f"})
	require.ErrorContains(t, err, "at most 16 outputs; this model has 17")
	_, err = Emit(classifier(t, MaxFunctionOutputs, true), Options{Dialect: Postgres, Function: "f"})
	require.NoError(t, err)
	_, err = Emit(p, Options{Dialect: DuckDB, Function: "f", Keep: []string{"id"}})
	require.ErrorContains(t, err, "no kept columns")
	_, err = Emit(p, Options{Dialect: MySQL, Function: "f", MaxNest: mysqlFunctionMaxNest + 1})
	require.ErrorContains(t, err, "crashed on CREATE FUNCTION")
}

// TestFunctionText: each dialect's definition, the arguments in feature
// order, and a PostgreSQL dollar quote that no label holds.
func TestFunctionText(t *testing.T) {
	p := classifier(t, 3, true)
	p.Classes[1] = "$sawmill$"
	for d, want := range map[Dialect][]string{
		Postgres: {"CREATE OR REPLACE FUNCTION \"f_0\"(a0 float8)\nRETURNS float8 LANGUAGE sql IMMUTABLE", "RETURNS text", "AS $xsawmill$"},
		DuckDB:   {"CREATE OR REPLACE MACRO \"f_0\"(a0) AS (", "NULLIF(a0, 'NaN'::DOUBLE) AS x0"},
		Spark: {"CREATE OR REPLACE FUNCTION `f_0`(a0 DOUBLE)\nRETURNS DOUBLE\nDETERMINISTIC CONTAINS SQL\nRETURN\nWITH\n", "RETURNS STRING",
			"CASE WHEN isnan(a0) THEN NULL ELSE a0 END AS x0", "measured on Spark 4.0.1", "-- Call: SELECT `f_0`(`x`), `f_1`(`x`), `f_2`(`x`), `f`(`x`) FROM t;"},
		MySQL: {"DROP FUNCTION IF EXISTS `f_0`;", "DELIMITER $$\nCREATE FUNCTION `f_0`(a0 DOUBLE)\nRETURNS DOUBLE DETERMINISTIC\nBEGIN", "RETURNS VARCHAR(9) CHARACTER SET utf8mb4", "SET x0 = a0;", "END$$\nDELIMITER ;"},
	} {
		files, err := Emit(p, Options{Dialect: d, Function: "f"})
		require.NoError(t, err, "%s", d)
		text := string(files[0].Data)
		for _, w := range want {
			require.Contains(t, text, w, "%s", d)
		}
		stmts, err := FunctionStatements(p, Options{Dialect: d, Function: "f"})
		require.NoError(t, err)
		n := 4
		if d == MySQL {
			n = 8 // a DROP before each CREATE
		}
		require.Len(t, stmts, n, "%s", d)
		for _, s := range stmts {
			require.False(t, strings.HasPrefix(s, "--") || strings.HasSuffix(s, ";"), "%s: statement %q", d, s)
		}
	}
}

// TestFuncStylesEveryDialect: every dialect says in funcStyles how it
// writes functions or why it writes none, never both.
func TestFuncStylesEveryDialect(t *testing.T) {
	for _, d := range Dialects {
		st, ok := funcStyles[d]
		require.True(t, ok, "%s has no funcStyles entry", d)
		require.True(t, (st.refusal == "") == (st.head != nil), "%s: a refusal or a head, not both", d)
	}
}

// TestMySQLQuoting: backquoted names with a backquote doubled, backslashes
// in labels spelled by CHAR(92), names past MySQL's lengths refused.
func TestMySQLQuoting(t *testing.T) {
	require.Equal(t, "`a``b\"c`", MySQL.ident("a`b\"c"))
	require.Equal(t, "'it''s'", MySQL.str("it's"))
	require.Equal(t, `CONCAT('a', CHAR(92 USING utf8mb4), 'b', CHAR(92 USING utf8mb4))`, MySQL.str(`a\b\`))
	require.Equal(t, `'a\b'`, Postgres.str(`a\b`))
	p := classifier(t, 2, false)
	_, err := Emit(p, Options{Dialect: MySQL, Columns: []string{strings.Repeat("é", 65)}})
	require.True(t, errors.Is(err, ErrNames))
	require.ErrorContains(t, err, "65 characters long, and MySQL allows 64")
	_, err = Emit(p, Options{Dialect: MySQL, Columns: []string{strings.Repeat("é", 64)}})
	require.NoError(t, err)
	_, err = Emit(p, Options{Dialect: MySQL, Columns: []string{"x "}})
	require.ErrorContains(t, err, "ends with white space")
	_, err = Emit(p, Options{Dialect: MySQL, Columns: []string{"\v"}})
	require.ErrorContains(t, err, "ends with white space")
	_, err = Emit(p, Options{Dialect: MySQL, Columns: []string{"t\U0001F321"}})
	require.ErrorContains(t, err, "outside the Basic Multilingual Plane")
	_, err = Emit(p, Options{Dialect: MySQL, Columns: []string{"X"}, Keep: []string{"x"}})
	require.NoError(t, err, "a kept column may share a feature's column")
}

// TestMySQLExpRefused: an exp transform whose sums could pass e^709.78 is
// refused in mysql text (MySQL has no infinity), and written below it.
func TestMySQLExpRefused(t *testing.T) {
	mk := func(leaf float64) *compile.Program { return stumpRegression(t, forest.Exp, leaf) }
	_, err := Emit(mk(800), Options{Dialect: MySQL})
	require.ErrorContains(t, err, "MySQL has no infinity")
	_, err = Emit(mk(800), Options{Dialect: Postgres})
	require.NoError(t, err)
	_, err = Emit(mk(700), Options{Dialect: MySQL})
	require.NoError(t, err)
}

// stumpRegression is one stump over x with leaves leaf and -1 under the
// transform tr.
func stumpRegression(t *testing.T, tr forest.Transform, leaf float64) *compile.Program {
	t.Helper()
	f := &forest.Forest{Task: forest.Regression, InputPrecision: forest.Float64, Combine: forest.Sum, Transform: tr,
		Features: []string{"x"}, BaseScore: []float64{0}, Trees: []forest.Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{0.5, 0, 0},
			Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: make([]bool, 3), Value: []float64{0, leaf, -1}}}}
	require.NoError(t, f.Validate("stump"))
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	return p
}

// TestSparkInlined: the size of a Spark function body once every stage is
// substituted into each place that reads it; names in strings and
// comments are no references.
func TestSparkInlined(t *testing.T) {
	x0 := "CASE WHEN isnan(a0) THEN NULL ELSE a0 END"
	g := &gen{stageItems: [][]string{{x0 + " AS x0"}, {"x0", "x0 + x0 -- x0 AS y"}, {"x0 AS x0", "y * 'y' AS y"}}}
	y := float64(len("x0 + x0 -- x0")-4) + 2*float64(len(x0))
	require.Equal(t, float64(len("y * 'y'")-1)+y, g.sparkInlined("y"))
	require.Equal(t, float64(len("x0 + y")-3)+float64(len(x0))+float64(len("y * 'y'")-1)+y, g.sparkInlined("x0 + y"))
	require.Equal(t, []string{"CASE", "WHEN", "z", "THEN", "END"}, sqlWords("CASE WHEN z > 1e+00D THEN 'a b' END -- x"))
}

// TestSparkFunctionSize: a float32 model, whose rounding stages read each
// sum ten times, is refused in Spark's function form (Spark copies every
// stage into each reader) and written as a query; a 30-tree forest is
// written as functions.
func TestSparkFunctionSize(t *testing.T) {
	load := func(c string) *compile.Program {
		f, err := forest.ReadFile("../../golden/testdata/" + c + "/model.json")
		require.NoError(t, err)
		p, _, err := compile.Compile(f, compile.Options{})
		require.NoError(t, err)
		return p
	}
	f32 := load("v2-normalize-float32")
	_, err := Emit(f32, Options{Dialect: Spark, Function: "f"})
	require.True(t, errors.Is(err, ErrFunctionSize), "%v", err)
	require.ErrorContains(t, err, "emit the query instead")
	_, err = FunctionStatements(f32, Options{Dialect: Spark, Function: "f"})
	require.True(t, errors.Is(err, ErrFunctionSize), "%v", err)
	_, err = Emit(f32, Options{Dialect: Spark})
	require.NoError(t, err)
	_, err = Emit(f32, Options{Dialect: DuckDB, Function: "f"})
	require.NoError(t, err, "only Spark inlines a function's stages")
	_, err = Emit(load("sklearn-wine"), Options{Dialect: Spark, Function: "f"})
	require.NoError(t, err)
}
