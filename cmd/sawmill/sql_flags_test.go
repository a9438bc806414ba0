package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/internal/testenv"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// deepModel has trees 10 to 12 splits deep.
const deepModel = "../../golden/testdata/trained-regression/model.json"

// --max-nest bounds the CASE nesting: the nested layout refuses a tree
// deeper than it, auto falls back to the table layout, and the default for
// sqlite (12) takes this model nested.
func TestCompileSQLMaxNest(t *testing.T) {
	dir := t.TempDir()
	code, _, errOut := sawmill(t, "compile", deepModel, "--target", "sql", "--dialect", "sqlite", "--layout", "nested", "--max-nest", "5", "-o", dir)
	assert.Equal(t, 1, code)
	assert.Contains(t, errOut, "nests CASE at most 5 deep")
	for _, c := range []struct{ nest, layout string }{{"5", "table"}, {"0", "nested"}, {"40", "nested"}} {
		code, _, errOut = sawmill(t, "compile", deepModel, "--target", "sql", "--dialect", "sqlite", "--max-nest", c.nest, "-o", dir)
		require.Equal(t, 0, code, errOut)
		b, err := os.ReadFile(filepath.Join(dir, "score.sql"))
		require.NoError(t, err)
		assert.Contains(t, string(b), "layout "+c.layout+".", "--max-nest %s", c.nest)
	}
	code, _, errOut = sawmill(t, "compile", deepModel, "--target", "sql", "--max-nest", "1", "-o", dir)
	assert.Equal(t, 1, code)
	assert.Contains(t, errOut, "--max-nest 1: must be 2 or more")
}

// --columns reads a feature from another column (pairs are CSV: quote one
// holding a comma); a pair naming no feature is an error that says so.
func TestCompileSQLColumns(t *testing.T) {
	dir := t.TempDir()
	code, _, errOut := sawmill(t, "compile", pumpModel, "--target", "sql", "--dialect", "sqlite", "--columns", `vibration_rms=vib,"bearing_temp_c=temp, °C"`, "-o", dir)
	require.Equal(t, 0, code, errOut)
	b, err := os.ReadFile(filepath.Join(dir, "score.sql"))
	require.NoError(t, err)
	assert.Contains(t, string(b), `"temp, °C" AS x1`)
	code, _, errOut = sawmill(t, "compile", pumpModel, "--target", "sql", "--columns", "nope=x", "-o", dir)
	assert.Equal(t, 1, code)
	assert.Contains(t, errOut, `the model has no feature "nope"`)
}

// --selftest writes selftest.sql beside score.sql; the stock sqlite3 shell
// runs it and returns no row.
func TestCompileSQLSelftest(t *testing.T) {
	dir := t.TempDir()
	code, _, errOut := sawmill(t, "compile", deepModel, "--target", "sql", "--dialect", "ansi", "--selftest", "-o", dir)
	require.Equal(t, 0, code, errOut)
	script, err := os.ReadFile(filepath.Join(dir, "selftest.sql"))
	require.NoError(t, err)
	assert.Contains(t, string(script), "No row returned is the proof")
	shell := testenv.Tool(t, "sqlite3", "Debian package sqlite3")
	cmd := exec.Command(shell, "-batch", "-bail", ":memory:")
	cmd.Stdin = strings.NewReader(string(script))
	out, err := cmd.CombinedOutput()
	require.NoError(t, err, "%s", out)
	assert.Empty(t, strings.TrimSpace(string(out)), "rows that differ")
}

// verify --max-nest holds the SQL runners' statements to it: every check
// still agrees (the table layout walks the deep trees in stages) and the
// nested layout is declined for trees deeper than it.
func TestVerifySQLMaxNest(t *testing.T) {
	code, out, errOut := sawmill(t, "verify", deepModel, "--target", "sqlite", "--max-nest", "4", "--max-rows", "300")
	require.Equal(t, 0, code, "%s\n%s", out, errOut)
	assert.Contains(t, out, "past the 4 levels of CASE")
	assert.Regexp(t, `sqlite\s+table\s+agree`, out)
}

// --target c --selftest writes NAME_selftest.c beside NAME.h and NAME.c;
// gcc builds the three with a main that returns NAME_selftest(), which is
// 0 (verify's TestCSelftest changes a leaf and sees the row).
func TestCompileCSelftest(t *testing.T) {
	dir := t.TempDir()
	code, _, errOut := sawmill(t, "compile", pumpModel, "--target", "c", "--name", "pump", "--selftest", "-o", dir)
	require.Equal(t, 0, code, errOut)
	src, err := os.ReadFile(filepath.Join(dir, "pump_selftest.c"))
	require.NoError(t, err)
	assert.Contains(t, string(src), "int pump_selftest(void)")
	testenv.Tool(t, "gcc", "")
	main := "int pump_selftest(void);\nint main(void) { return pump_selftest(); }\n"
	require.NoError(t, os.WriteFile(filepath.Join(dir, "main.c"), []byte(main), 0o644))
	build := exec.Command("gcc", "-std=c99", "-O2", "-o", "st", "main.c", "pump.c", "pump_selftest.c", "-lm")
	build.Dir = dir
	out, err := build.CombinedOutput()
	require.NoError(t, err, "%s", out)
	out, err = exec.Command(filepath.Join(dir, "st")).CombinedOutput()
	require.NoError(t, err, "pump_selftest() is not 0: %s", out)
}

// --function with spark writes Spark SQL functions; a float32 model whose
// body Spark would inline past its bound, and sqlite, are refused with
// errors that say why and what to emit instead.
func TestCompileSparkFunction(t *testing.T) {
	dir := t.TempDir()
	code, _, errOut := sawmill(t, "compile", "../../golden/testdata/sklearn-wine/model.json", "--target", "sql", "--dialect", "spark", "--function", "wine", "-o", dir)
	require.Equal(t, 0, code, errOut)
	b, err := os.ReadFile(filepath.Join(dir, "score.sql"))
	require.NoError(t, err)
	assert.Contains(t, string(b), "CREATE OR REPLACE FUNCTION `wine_0`(a0 DOUBLE, a1 DOUBLE,")
	assert.Contains(t, string(b), "RETURNS STRING\nDETERMINISTIC CONTAINS SQL\nRETURN\nWITH\n")
	assert.Contains(t, string(b), "measured on Spark 4.0.1")
	code, _, errOut = sawmill(t, "compile", "../../golden/testdata/v2-normalize-float32/model.json", "--target", "sql", "--dialect", "spark", "--function", "f", "-o", dir)
	assert.Equal(t, 1, code)
	assert.Contains(t, errOut, "would be inlined into an expression of")
	assert.Contains(t, errOut, "emit the query instead")
	code, _, errOut = sawmill(t, "compile", pumpModel, "--target", "sql", "--dialect", "sqlite", "--function", "f", "-o", dir)
	assert.Equal(t, 1, code)
	assert.Contains(t, errOut, "sqlite has no SQL-bodied scalar functions")
}
