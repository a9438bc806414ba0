package main

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// readingsCSV invents n pump readings (with ids and a few empty cells); they
// stand for no real measurement. bad, when > 0, puts text in row bad.
func readingsCSV(n, bad int) []byte {
	rng := rand.New(rand.NewPCG(1, uint64(n)))
	var b bytes.Buffer
	b.WriteString("pump_id,vibration_rms,bearing_temp_c,motor_current_a,flow_m3h,suction_pressure_kpa\n")
	for i := 1; i <= n; i++ {
		fmt.Fprintf(&b, "\"P%d, bay %d\"", i, i%7) // a kept cell that needs quoting
		for j, base := range []float64{1, 40, 10, 30, 70} {
			switch {
			case i == bad && j == 2:
				b.WriteString(",hot")
			case rng.IntN(50) == 0:
				b.WriteString(",")
			default:
				fmt.Fprintf(&b, ",%.3f", base*(1+2*rng.Float64()))
			}
		}
		b.WriteByte('\n')
	}
	return b.Bytes()
}

// Streaming predict writes exactly what scoring every row at once writes,
// in input order, over many chunks and any number of workers.
func TestPredictStreamsInOrder(t *testing.T) {
	dir := t.TempDir()
	model := trainModel(t, dir)
	f, err := forest.ReadFile(model)
	require.NoError(t, err)
	data := readingsCSV(3*predictChunk+17, 0)
	keep := []string{"pump_id"}

	all, err := forest.ReadRows(bytes.NewReader(data), "r.csv", f.Features, forest.RowOptions{Keep: keep})
	require.NoError(t, err)
	var want bytes.Buffer
	require.NoError(t, writePredictions(&want, f, all, keep, false))

	for _, workers := range []int{1, 2, 5} {
		rr, err := forest.NewRowReader(bytes.NewReader(data), "r.csv", f.Features, forest.RowOptions{Keep: keep})
		require.NoError(t, err)
		var got bytes.Buffer
		require.NoError(t, streamPredictions(&got, f, rr, keep, false, workers))
		require.Equal(t, want.String(), got.String(), "%d workers", workers)
	}
	assert.Equal(t, 3*predictChunk+17+1, strings.Count(want.String(), "\n"))

	// Through the command, to a file: the same bytes.
	rows := filepath.Join(dir, "rows.csv")
	require.NoError(t, os.WriteFile(rows, data, 0o644))
	out := filepath.Join(dir, "scores.csv")
	code, _, errs := sawmill(t, "predict", model, rows, "--keep", "pump_id", "-o", out)
	require.Equal(t, 0, code, errs)
	b, _ := os.ReadFile(out)
	assert.Equal(t, want.String(), string(b))

	// Header only: the header alone.
	rr, err := forest.NewRowReader(strings.NewReader("vibration_rms,bearing_temp_c,motor_current_a,flow_m3h,suction_pressure_kpa\n"), "e.csv", f.Features, forest.RowOptions{})
	require.NoError(t, err)
	var empty bytes.Buffer
	require.NoError(t, streamPredictions(&empty, f, rr, nil, false, 2))
	assert.Equal(t, "bearing_wear,cavitation,healthy,misalignment,class\n", empty.String())
}

// A bad cell deep in the file (past the first chunks) stops predict with
// the line and column, and -o leaves no file, not even a partial one.
func TestPredictStreamBadCellLate(t *testing.T) {
	dir := t.TempDir()
	model := trainModel(t, dir)
	rows := filepath.Join(dir, "rows.csv")
	bad := 2*predictChunk + 5
	require.NoError(t, os.WriteFile(rows, readingsCSV(3*predictChunk, bad), 0o644))
	out := filepath.Join(dir, "scores.csv")
	code, _, errs := sawmill(t, "predict", model, rows, "-o", out)
	assert.Equal(t, 1, code)
	assert.Contains(t, errs, fmt.Sprintf(`rows.csv:%d: column "motor_current_a": "hot" is not a number`, bad+1))
	assert.NoFileExists(t, out)
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		assert.False(t, strings.Contains(e.Name(), ".tmp"), "temporary file %s left behind", e.Name())
	}
}
