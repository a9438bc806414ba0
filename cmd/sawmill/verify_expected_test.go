package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// recorded writes predict's outputs for readings.csv as the "library's"
// recorded outputs, with output col of data row plant (0-based) moved by
// delta; it returns the file.
func recorded(t *testing.T, dir, model string, plant, col int, delta float64) string {
	t.Helper()
	code, out, errs := sawmill(t, "predict", model, "testdata/readings.csv", "--keep", "pump_id")
	require.Equal(t, 0, code, errs)
	recs := readCSV(t, out)
	if delta != 0 {
		v, err := strconv.ParseFloat(recs[plant+1][1+col], 64)
		require.NoError(t, err)
		recs[plant+1][1+col] = num(v + delta)
	}
	var b strings.Builder
	for _, r := range recs {
		b.WriteString(strings.Join(r, ",") + "\n")
	}
	path := filepath.Join(dir, "recorded-"+strconv.Itoa(plant)+"-"+strconv.Itoa(col)+"-"+num(delta)+".csv")
	require.NoError(t, os.WriteFile(path, []byte(b.String()), 0o644))
	return path
}

// verify --expected holds the model and every target against outputs the
// training library recorded: agreement within the tolerance passes; a
// planted difference fails, naming the row and showing it in full; a
// tolerance above the difference passes again.
func TestVerifyExpected(t *testing.T) {
	dir := t.TempDir()
	model := trainModel(t, dir)
	base := []string{"verify", model, "--data", "testdata/readings.csv", "--target", "go", "--layout", "nested"}

	good := recorded(t, dir, model, 0, 0, 0)
	code, out, errs := sawmill(t, append(base, "--expected", good)...)
	skipIfNotRun(t, "go", out)
	require.Equal(t, 0, code, out+errs)
	assert.Regexp(t, `model \(interpreter\)\s+agree\s+12 of 12 rows\s+max \|diff\| 0\n`, out)
	assert.Regexp(t, `go nested\s+agree\s+12 of 12 rows`, out)

	// Row 7 (line 8 of readings.csv), class "cavitation", off by 1e-6.
	bad := recorded(t, dir, model, 6, 1, 1e-6)
	code, out, errs = sawmill(t, append(base, "--expected", bad)...)
	assert.Equal(t, 1, code)
	assert.Regexp(t, `model \(interpreter\)\s+differ\s+11 of 12 rows\s+max \|diff\| 1e-06`, out)
	assert.Contains(t, out, "model (interpreter): first row off the recorded outputs at testdata/readings.csv:8\n")
	assert.Contains(t, out, "  vibration_rms ", "the row in full")
	assert.Contains(t, out, "  recorded ")
	assert.Contains(t, out, "output 1 is off by more than 1e-12")
	assert.Contains(t, errs, "the model is off the recorded outputs "+bad+" at testdata/readings.csv:8")
	assert.Contains(t, errs, "go nested is off the recorded outputs at testdata/readings.csv:8")

	code, out, errs = sawmill(t, append(base, "--expected", bad, "--tolerance", "1e-5")...)
	assert.Equal(t, 0, code, out+errs)

	// One column per output, in order, named anything.
	var b strings.Builder
	b.WriteString("p0,p1,p2,p3\n")
	for _, r := range readCSV(t, mustRead(t, good))[1:] {
		b.WriteString(strings.Join(r[1:5], ",") + "\n")
	}
	positional := filepath.Join(dir, "positional.csv")
	require.NoError(t, os.WriteFile(positional, []byte(b.String()), 0o644))
	code, out, errs = sawmill(t, append(base, "--expected", positional)...)
	assert.Equal(t, 0, code, out+errs)

	// Files that do not fit.
	short := filepath.Join(dir, "short.csv")
	require.NoError(t, os.WriteFile(short, []byte(strings.Join(strings.Split(b.String(), "\n")[:5], "\n")+"\n"), 0o644))
	code, _, errs = sawmill(t, append(base, "--expected", short)...)
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, short+": has 4 rows of outputs, and testdata/readings.csv has 12 rows or more")
	wrong := filepath.Join(dir, "wrong.csv")
	require.NoError(t, os.WriteFile(wrong, []byte("a,b\n1,2\n"), 0o644))
	code, _, errs = sawmill(t, append(base, "--expected", wrong)...)
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, wrong+`:1: found columns "a", "b": want columns named "bearing_wear", "cavitation", "healthy", "misalignment"`)
	code, _, errs = sawmill(t, "verify", model, "--expected", good)
	assert.Equal(t, 2, code)
	assert.Contains(t, errs, "--expected needs --data")
}

func mustRead(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	require.NoError(t, err)
	return string(b)
}

// A --data file longer than verifyChunk is verified a chunk at a time, and
// the report is the one of checking every row at once: rows, coverage,
// agreement, and the first row off the recorded outputs, in the last chunk.
func TestVerifyInChunks(t *testing.T) {
	dir := t.TempDir()
	model := trainModel(t, dir)
	bad := recorded(t, dir, model, 10, 2, 0.5)
	args := []string{"verify", model, "--data", "testdata/readings.csv", "--target", "go", "--layout", "nested", "--expected", bad, "--json"}
	type report struct {
		Rows     int            `json:"rows"`
		Given    int            `json:"given_rows"`
		Coverage map[string]int `json:"coverage"`
		Expected struct {
			Rows, Matches int
			First         struct {
				Index, Line int
			} `json:"first_mismatch"`
		} `json:"expected"`
		Checks []struct {
			Status  string `json:"status"`
			Rows    int    `json:"rows"`
			Matches int    `json:"matches"`
		} `json:"checks"`
	}
	runJSON := func() report {
		code, out, errs := sawmill(t, args...)
		skipIfNotRun(t, "go", out)
		require.Equal(t, 1, code, errs)
		var r report
		require.NoError(t, json.Unmarshal([]byte(out), &r), out)
		return r
	}
	whole := runJSON()
	saved := verifyChunk
	verifyChunk = 5
	defer func() { verifyChunk = saved }()
	chunked := runJSON()
	assert.Equal(t, whole, chunked)
	assert.Equal(t, 12, chunked.Rows)
	assert.Equal(t, 11, chunked.Expected.Matches)
	assert.Equal(t, 10, chunked.Expected.First.Index, "the row's index over the whole file")
	assert.Equal(t, 12, chunked.Expected.First.Line)
	require.Len(t, chunked.Checks, 1)
	assert.Equal(t, "agree", chunked.Checks[0].Status)
	assert.Equal(t, 12, chunked.Checks[0].Matches)
}
