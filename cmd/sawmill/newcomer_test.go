package main

// Tests of what a new user meets first: files of theirs never lost, typos
// refused, and errors that name the real problem. The tables are invented
// pump-health data (testdata/pumps.csv, readings.csv) or small invented
// tables built here.

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/verify"
)

// copyFile copies testdata into dir and returns the copy's path.
func copyFile(t *testing.T, src, dir string) string {
	t.Helper()
	b, err := os.ReadFile(src)
	require.NoError(t, err)
	dst := filepath.Join(dir, filepath.Base(src))
	require.NoError(t, os.WriteFile(dst, b, 0o644))
	return dst
}

// unchanged fails unless the file at path still holds want.
func unchanged(t *testing.T, path string, want []byte, msg string) {
	t.Helper()
	got, err := os.ReadFile(path)
	require.NoError(t, err, msg)
	assert.Equal(t, string(want), string(got), msg)
}

// trainModel grows a small forest on the pump table into dir.
func trainModel(t *testing.T, dir string) string {
	t.Helper()
	model := filepath.Join(dir, "pump-health.json")
	code, _, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id", "--trees", "5", "-o", model)
	require.Equal(t, 0, code, errs)
	return model
}

// Defect 1: predict never writes over its rows or model, under any
// spelling of the path; it replaces an earlier output of its own but not a
// file of the user's unless --force.
func TestPredictDoesNotOverwrite(t *testing.T) {
	dir := t.TempDir()
	model := trainModel(t, dir)
	rows := copyFile(t, "testdata/readings.csv", dir)
	orig, _ := os.ReadFile(rows)
	modelBytes, _ := os.ReadFile(model)
	link := filepath.Join(dir, "link.csv")
	require.NoError(t, os.Symlink(rows, link))
	hard := filepath.Join(dir, "hard.csv")
	require.NoError(t, os.Link(rows, hard))

	for _, out := range []string{rows, filepath.Join(dir, ".", "sub", "..", "readings.csv"), link, hard} {
		if out == filepath.Join(dir, ".", "sub", "..", "readings.csv") {
			require.NoError(t, os.MkdirAll(filepath.Join(dir, "sub"), 0o755))
		}
		for _, force := range []bool{false, true} {
			args := []string{"predict", model, rows, "-o", out}
			if force {
				args = append(args, "--force")
			}
			code, _, errs := sawmill(t, args...)
			assert.Equal(t, 1, code, "%v", args)
			assert.Contains(t, errs, "not writing over it", "%v", args)
			unchanged(t, rows, orig, fmt.Sprint(args))
		}
	}
	code, _, errs := sawmill(t, "predict", model, rows, "-o", model, "--force")
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, "is an input of this command")
	unchanged(t, model, modelBytes, "the model is an input too")

	// A file of the user's: refused, then replaced with --force.
	mine := filepath.Join(dir, "notes.csv")
	require.NoError(t, os.WriteFile(mine, []byte("pump_id,note\nP001,noisy\n"), 0o644))
	code, _, errs = sawmill(t, "predict", model, rows, "-o", mine)
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, mine+": exists and is not an earlier output of predict")
	assert.Contains(t, errs, "hint: choose another name, or pass --force")
	unchanged(t, mine, []byte("pump_id,note\nP001,noisy\n"), "the user's file")
	code, _, errs = sawmill(t, "predict", model, rows, "-o", mine, "--force")
	require.Equal(t, 0, code, errs)

	// An earlier output of predict is replaced without --force.
	scores := filepath.Join(dir, "scores.csv")
	for range 2 {
		code, _, errs = sawmill(t, "predict", model, rows, "-o", scores)
		require.Equal(t, 0, code, errs)
	}
}

// Defect 1: train never writes its model over the training data, nor over
// a file that is not a model sawmill trained; and --plots never replaces a
// file of the user's. Refusals come before training, and write nothing.
func TestTrainDoesNotOverwrite(t *testing.T) {
	dir := t.TempDir()
	data := copyFile(t, "testdata/pumps.csv", dir)
	orig, _ := os.ReadFile(data)
	train := func(out string, extra ...string) (int, string) {
		args := append([]string{"train", data, "--label", "state", "--ignore", "pump_id", "--trees", "3", "-o", out}, extra...)
		code, _, errs := sawmill(t, args...)
		return code, errs
	}
	for _, force := range [][]string{nil, {"--force"}} {
		code, errs := train(data, force...)
		assert.Equal(t, 1, code, "%v", force)
		assert.Contains(t, errs, data+": is an input of this command; not writing over it")
		unchanged(t, data, orig, "the training data")
	}

	// Someone else's model (or any other file) is the user's.
	other := filepath.Join(dir, "imported.json")
	imported := []byte(`{"sawmill_forest": 1, "provenance": {"trainer": "scikit-learn 1.2.1"}}`)
	require.NoError(t, os.WriteFile(other, imported, 0o644))
	code, errs := train(other)
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, other+": exists and is not a model sawmill train wrote; not overwriting it")
	unchanged(t, other, imported, "the imported model")
	code, errs = train(other, "--force")
	require.Equal(t, 0, code, errs)
	code, errs = train(other) // now it is a model sawmill trained
	require.Equal(t, 0, code, errs)

	// --plots: a chart of the user's is kept, and nothing is written.
	charts := filepath.Join(dir, "charts")
	require.NoError(t, os.MkdirAll(charts, 0o755))
	userSVG := []byte("<svg xmlns=\"http://www.w3.org/2000/svg\"><!-- my own chart --></svg>\n")
	require.NoError(t, os.WriteFile(filepath.Join(charts, "oob-error.svg"), userSVG, 0o644))
	fresh := filepath.Join(dir, "fresh.json")
	code, errs = train(fresh, "--plots", charts)
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, filepath.Join(charts, "oob-error.svg")+": exists and is not a chart sawmill drew")
	unchanged(t, filepath.Join(charts, "oob-error.svg"), userSVG, "the user's chart")
	assert.NoFileExists(t, fresh, "refused before training: no model written")
	// Charts sawmill drew are redrawn.
	other2 := filepath.Join(dir, "charts2")
	for range 2 {
		code, errs = train(fresh, "--plots", other2)
		require.Equal(t, 0, code, errs)
	}
	// The data as a chart's name: never, even with --force.
	code, errs = train(fresh, "--plots", dir, "--force")
	require.Equal(t, 0, code, errs, "no chart is named like the data here")
	dataAsChart := filepath.Join(dir, "oob-error.svg")
	require.NoError(t, os.Rename(data, dataAsChart))
	code, _, errs2 := sawmill(t, "train", dataAsChart, "--label", "state", "--ignore", "pump_id", "--trees", "3", "-o", fresh, "--plots", dir, "--force")
	assert.Equal(t, 1, code)
	assert.Contains(t, errs2, "is an input of this command")
	unchanged(t, dataAsChart, orig, "the training data named like a chart")
}

// Defect 1: compile refuses to write over its own model even with --force.
func TestCompileDoesNotOverwriteItsInput(t *testing.T) {
	dir := t.TempDir()
	model := trainModel(t, dir)
	b, _ := os.ReadFile(model)
	out := filepath.Join(dir, "go")
	require.NoError(t, os.MkdirAll(out, 0o755))
	inside := filepath.Join(out, "model.go") // the model, named like the file compile writes
	require.NoError(t, os.Rename(model, inside))
	code, _, errs := sawmill(t, "compile", inside, "--target", "go", "-o", out, "--force")
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, inside+": is an input of this command; not writing over it")
	unchanged(t, inside, b, "the model")
}

// Defect 2: unknown values and flags that do not apply to the target are
// usage errors naming the valid ones, not silently accepted.
func TestTyposRefused(t *testing.T) {
	model := "testdata/logistic.json"
	out := t.TempDir()
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"verify", model, "--layout", "foo"}, `--layout "foo" is unknown for the targets: use nested, table, branchless, binned`},
		{[]string{"verify", model, "--target", "c", "--layout", "branchless"}, `--layout "branchless" is unknown for --target c: use nested, table, binned`},
		{[]string{"verify", model, "--variant", "flaot"}, `--variant "flaot" is unknown for the targets: use double, float`},
		{[]string{"verify", model, "--target", "go", "--variant", "float"}, `--variant "float": --target go has no variants`},
		{[]string{"verify", model, "--target", "go,c", "--dialect", "postgres"}, `--dialect is for SQL targets, and --target go,c has none`},
		{[]string{"compile", model, "--target", "go", "--float", "-o", out}, "--float (c only): not for --target go, whose own flags are --package, --sample"},
		{[]string{"compile", model, "--target", "go", "--dialect", "postgres", "-o", out}, "--dialect (sql only): not for --target go"},
		{[]string{"compile", model, "--target", "c", "--package", "x", "-o", out}, "--package (go only): not for --target c, whose own flags are --board-facts, --constant-time, --flash-budget, --float, --int-leaves, --leaf-values, --name, --pack, --ram-budget, --selftest, --threads"},
		{[]string{"compile", model, "--target", "sql", "--sample", "testdata/readings.csv", "-o", out}, "--sample (go only): not for --target sql"},
	}
	for _, c := range cases {
		code, stdout, errs := sawmill(t, c.args...)
		assert.Equal(t, 2, code, "%v", c.args)
		assert.Empty(t, stdout, "%v", c.args)
		assert.Contains(t, errs, c.want, "%v", c.args)
	}
	ents, _ := os.ReadDir(out)
	assert.Empty(t, ents, "nothing compiled")
}

// Defect 2: a verify in which no check ran verified nothing, and fails.
func TestVerifyNothingRanFails(t *testing.T) {
	rep := &verify.Report{Checks: []*verify.Check{
		{Target: "c", Variant: "double", Layout: "nested", Status: verify.NotRun, Reason: "gcc not on PATH"},
	}}
	err := verifyVerdict(rep, "", false)
	require.Error(t, err)
	assert.Contains(t, err.Error(), "no check ran, so nothing was verified")
	rep.Checks = append(rep.Checks, &verify.Check{Target: "go", Layout: "nested", Status: verify.Agree})
	assert.NoError(t, verifyVerdict(rep, "", false), "one check that agreed is a pass")
}

// Defect 4: labels that are all small whole numbers (wine's 0, 1, 2) are
// class codes as readily as a quantity; train asks for --task rather than
// growing a regressor silently.
func TestWholeNumberLabelsAskForTask(t *testing.T) {
	dir := t.TempDir()
	data := filepath.Join(dir, "codes.csv")
	var b strings.Builder
	b.WriteString("vibration_rms,bearing_temp_c,grade\n")
	for i := range 60 {
		fmt.Fprintf(&b, "%g,%g,%d\n", 1+float64(i%7)/3, 40+float64(i%11)*3, i%3)
	}
	require.NoError(t, os.WriteFile(data, []byte(b.String()), 0o644))
	model := filepath.Join(dir, "m.json")
	code, out, errs := sawmill(t, "train", data, "--label", "grade", "--trees", "3", "-o", model)
	assert.Equal(t, 1, code)
	assert.Empty(t, out)
	assert.Contains(t, errs, `codes.csv: column "grade": every label is a whole number, 3 distinct (0, 1, 2): class codes or a quantity?`)
	assert.Contains(t, errs, "hint: pass --task classification to predict the classes, or --task regression to predict a number")
	assert.NoFileExists(t, model)

	code, out, errs = sawmill(t, "train", data, "--label", "grade", "--trees", "3", "--task", "classification", "-o", model)
	require.Equal(t, 0, code, errs)
	assert.Contains(t, out, "2 features, 3 classes")
	code, out, errs = sawmill(t, "train", data, "--label", "grade", "--trees", "3", "--task", "regression", "-o", model)
	require.Equal(t, 0, code, errs)
	assert.Contains(t, out, "2 features, regression")
}

// Defect 5: errors name the real problem, all of it.
func TestErrorsDoNotMislead(t *testing.T) {
	dir := t.TempDir()
	// A misspelt label: one error, not a second false one about pump_id.
	code, _, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "status", "--ignore", "pump_id", "-o", filepath.Join(dir, "m.json"))
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, `no column named "status" (the label)`)
	assert.NotContains(t, errs, "is the label and cannot be ignored")

	// Two columns of text: the hint names both.
	data := filepath.Join(dir, "ids.csv")
	require.NoError(t, os.WriteFile(data, []byte("pump_id,timestamp,vibration_rms,state\nP1,2026-11-01,1.5,healthy\nP2,2026-11-02,3.1,cavitation\n"), 0o644))
	code, _, errs = sawmill(t, "train", data, "--label", "state", "-o", filepath.Join(dir, "m.json"))
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, "hint: leave such columns out with --ignore pump_id,timestamp\n")
	code, _, errs = sawmill(t, "train", data, "--label", "state", "--ignore", "pump_id", "-o", filepath.Join(dir, "m.json"))
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, "hint: leave such columns out with --ignore pump_id,timestamp\n", "the hint is the whole --ignore to use")

	// -o names a folder; --name names the SQL file.
	model := trainModel(t, dir)
	code, _, errs = sawmill(t, "compile", model, "--target", "sql", "-o", filepath.Join(dir, "myquery.sql"))
	assert.Equal(t, 2, code)
	assert.Contains(t, errs, "-o names the folder to write into, not a file")
	assert.Contains(t, errs, "hint: -o "+dir+" --name myquery writes "+filepath.Join(dir, "myquery.sql"))
	assert.NoDirExists(t, filepath.Join(dir, "myquery.sql"))
	code, out, errs := sawmill(t, "compile", model, "--target", "sql", "-o", dir, "--name", "myquery")
	require.Equal(t, 0, code, errs)
	assert.FileExists(t, filepath.Join(dir, "myquery.sql"))
	assert.Contains(t, out, "sql into "+dir+": 1 file, ")
	// An existing file as -o.
	code, _, errs = sawmill(t, "compile", model, "--target", "c", "-o", model)
	assert.Equal(t, 2, code)
	assert.Contains(t, errs, "-o names the folder to write into, not a file")
}

// Small things: inspect prints shares readably and cuts no line; the
// program's name is said once.
func TestInspectAndMessagesTidy(t *testing.T) {
	model := trainModel(t, t.TempDir())
	code, out, errs := sawmill(t, "inspect", model)
	require.Equal(t, 0, code, errs)
	assert.NotContains(t, out, "…", "no line is cut")
	assert.Regexp(t, `\n  oob_share +0\.\d{1,4}\n`, out, "four significant digits, not 0.3659200000000001")
	assert.Contains(t, out, "seed=1", "the last setting is shown")
	for _, line := range strings.Split(out, "\n") {
		assert.LessOrEqual(t, len([]rune(line)), 100, "line %q", line)
	}

	code, _, errs = sawmill(t, "train", "testdata/pumps.csv", "--label", "state")
	assert.Equal(t, 2, code)
	assert.True(t, strings.HasPrefix(errs, "sawmill train: -o is required"), errs)
}

// verify names the C compilers and their versions that built the code, in
// its text and in --json.
func TestVerifyNamesCompiler(t *testing.T) {
	code, out, errs := sawmill(t, "verify", "testdata/logistic.json", "--target", "c", "--layout", "nested", "--variant", "double")
	skipIfNotRun(t, "c", out)
	require.Equal(t, 0, code, errs)
	assert.Regexp(t, `built with\n  c/double  gcc \d+\.\d+(\.\d+)? -std=c99 -O2; clang \d+\.\d+(\.\d+)? -std=c11 -O0\n`, out)
	code, out, errs = sawmill(t, "verify", "testdata/logistic.json", "--target", "c", "--layout", "nested", "--variant", "double", "--json")
	require.Equal(t, 0, code, errs)
	assert.Regexp(t, `"toolchain": "gcc \d+[.\d]* -std=c99 -O2; clang \d+[.\d]* -std=c11 -O0"`, out)
}
