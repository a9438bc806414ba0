package main

// The tables in testdata (pumps.csv, readings.csv, bad_cell.csv) and the
// model logistic.json are invented pump-health data; they stand for no real
// measurement.

import (
	"bytes"
	"encoding/csv"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// sawmill runs the command line in-process.
func sawmill(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var out, errb bytes.Buffer
	code = run(args, strings.NewReader(""), &out, &errb)
	return code, out.String(), errb.String()
}

// Every command's -h carries an example of the pump-health scenario (the
// project's rule for examples).
func TestHelpHasExamples(t *testing.T) {
	for _, cmd := range []string{"train", "predict", "inspect"} {
		code, out, _ := sawmill(t, cmd, "-h")
		require.Equal(t, 0, code, cmd)
		assert.Contains(t, out, "Examples:", cmd)
		assert.Contains(t, out, "pump-health.json", cmd)
	}
	code, out, _ := sawmill(t, "-h")
	require.Equal(t, 0, code)
	for _, cmd := range []string{"train", "predict", "inspect"} {
		assert.Contains(t, out, cmd)
	}
}

// Misuse of the command line: "sawmill: " and the command first, a hint,
// exit code 2, no usage dump (style.md, "Errors and the CLI").
func TestUsageErrors(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"train", "testdata/pumps.csv", "--label", "state", "-o", "x.json", "--bogus"}, "sawmill train: unknown flag: --bogus\nhint: see 'sawmill train -h'\n"},
		{[]string{"train", "testdata/pumps.csv", "-o", "x.json"}, "sawmill train: --label is required"},
		{[]string{"train", "testdata/pumps.csv", "--label", "state"}, "sawmill train: -o is required"},
		{[]string{"train", "--label", "state", "-o", "x.json"}, "sawmill train: expected one training CSV file, got 0 argument(s)"},
		{[]string{"train", "testdata/pumps.csv", "--label", "state", "-o", "x.json", "--task", "ranking"}, `--task "ranking": use classification or regression`},
		{[]string{"train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id", "-o", filepath.Join(t.TempDir(), "m.json"), "--mtry", "9"}, "sawmill train: --mtry 9: must be between 1 and 5, the number of features"},
		{[]string{"train", "testdata/pumps.csv", "--label", "state", "-o", "x.json", "--trees", "0"}, "--trees 0: must be at least 1"},
		{[]string{"predict", "testdata/logistic.json"}, "expected a model file and a CSV file of rows, got 1 argument(s)"},
		{[]string{"inspect", "--colour"}, "unknown flag: --colour"},
		{[]string{"frobnicate"}, `sawmill: unknown command "frobnicate" for "sawmill"`},
	}
	for _, c := range cases {
		code, out, errs := sawmill(t, c.args...)
		assert.Equal(t, 2, code, "%v", c.args)
		assert.Empty(t, out, "%v", c.args)
		assert.Contains(t, errs, c.want, "%v", c.args)
		assert.NotContains(t, errs, "Usage:", "%v: errors come without the usage text", c.args)
	}
}

// Bad inputs: the message starts with the file (and line and column for a
// cell), exit code 1, nothing written (style.md, "Errors and the CLI";
// design.md, "The command line").
func TestFileErrors(t *testing.T) {
	dir := t.TempDir()
	broken := filepath.Join(dir, "broken.json")
	require.NoError(t, os.WriteFile(broken, []byte(`{"sawmill_forest": 1, "task": "classification",`), 0o644))
	cases := []struct {
		args []string
		want []string
	}{
		{[]string{"train", "testdata/none.csv", "--label", "state", "-o", filepath.Join(dir, "m.json")},
			[]string{"sawmill: testdata/none.csv: no such file or directory\n"}},
		{[]string{"train", "testdata/bad_cell.csv", "--label", "state", "--ignore", "pump_id", "-o", filepath.Join(dir, "m.json")},
			[]string{`sawmill: testdata/bad_cell.csv:3: column "bearing_temp_c": "hot" is not a number`,
				`testdata/bad_cell.csv:4: column "motor_current_a": missing value`}},
		{[]string{"train", "testdata/pumps.csv", "--label", "status", "-o", filepath.Join(dir, "m.json")},
			[]string{`testdata/pumps.csv:1: no column named "status" (the label)`}},
		{[]string{"train", "testdata/pumps.csv", "--label", "state", "-o", filepath.Join(dir, "no", "such", "m.json")},
			[]string{"the folder to write the model in does not exist"}},
		{[]string{"predict", "testdata/none.json", "testdata/readings.csv"},
			[]string{"sawmill: testdata/none.json: no such file or directory"}},
		{[]string{"predict", "testdata/logistic.json", "testdata/bad_cell.csv"},
			[]string{`sawmill: testdata/bad_cell.csv:3: column "bearing_temp_c": "hot" is not a number`}},
		{[]string{"predict", "testdata/logistic.json", "testdata/readings.csv", "--keep", "serial"},
			[]string{`testdata/readings.csv:1: no column named "serial" (asked to keep it)`}},
		{[]string{"inspect", "testdata/none.json"},
			[]string{"sawmill: testdata/none.json: no such file or directory"}},
		{[]string{"inspect", broken},
			[]string{"sawmill: " + broken + ": "}},
	}
	for _, c := range cases {
		code, out, errs := sawmill(t, c.args...)
		assert.Equal(t, 1, code, "%v", c.args)
		assert.Empty(t, out, "%v", c.args)
		for _, w := range c.want {
			assert.Contains(t, errs, w, "%v", c.args)
		}
	}
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	assert.Len(t, entries, 1, "only broken.json: no model was written by the failed runs")
}

func readCSV(t *testing.T, s string) [][]string {
	t.Helper()
	recs, err := csv.NewReader(strings.NewReader(s)).ReadAll()
	require.NoError(t, err)
	return recs
}
