package main

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// `sawmill predict` prints the kept columns, one column per class in class
// order, then the class, each number in shortest round-trip form, exactly
// the interpreter's outputs (design.md, "The command line").
func TestPredictClassifier(t *testing.T) {
	model := filepath.Join(t.TempDir(), "pump-health.json")
	code, _, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id", "--trees", "20", "-o", model)
	require.Equal(t, 0, code, errs)
	code, out, errs := sawmill(t, "predict", model, "testdata/readings.csv", "--keep", "pump_id,timestamp")
	require.Equal(t, 0, code, errs)
	recs := readCSV(t, out)
	require.Len(t, recs, 13)
	assert.Equal(t, []string{"pump_id", "timestamp", "bearing_wear", "cavitation", "healthy", "misalignment", "class"}, recs[0])

	f, err := forest.ReadFile(model)
	require.NoError(t, err)
	rows, err := forest.ReadRowsFile("testdata/readings.csv", f.Features, forest.RowOptions{})
	require.NoError(t, err)
	for i, rec := range recs[1:] {
		assert.Equal(t, fmt.Sprintf("P%03d", i+1), rec[0], "pump ids kept in order")
		want := make([]float64, 4)
		f.Predict(rows.Row(i), want)
		sum := 0.0
		for j := range 4 {
			got, err := strconv.ParseFloat(rec[2+j], 64)
			require.NoError(t, err)
			assert.Equal(t, want[j], got, "row %d, class %d: printed exactly (shortest round trip)", i, j)
			assert.Equal(t, strconv.FormatFloat(want[j], 'g', -1, 64), rec[2+j])
			sum += got
		}
		assert.InDelta(t, 1, sum, 1e-12, "class shares of a forest of probability leaves sum to 1")
		assert.Equal(t, f.Classes[forest.Argmax(want)], rec[6])
	}
	// readings.csv line 5 has an empty bearing_temp_c: a missing value, scored all the same.
	assert.True(t, math.IsNaN(rows.Row(3)[1]))
}

// A logistic binary model prints 1−p and p, then the class (forest-format.md,
// "Meaning", steps 2 to 4). Expected values are worked out by hand from the
// model's single tree.
func TestPredictLogistic(t *testing.T) {
	out := filepath.Join(t.TempDir(), "scores.csv")
	code, stdout, errs := sawmill(t, "predict", "testdata/logistic.json", "testdata/readings.csv", "--keep", "pump_id", "-o", out)
	require.Equal(t, 0, code, errs)
	assert.Empty(t, stdout, "with -o nothing goes to standard output")
	b, err := os.ReadFile(out)
	require.NoError(t, err)
	recs := readCSV(t, string(b))
	assert.Equal(t, []string{"pump_id", "healthy", "bearing_wear", "class"}, recs[0])
	sig := func(z float64) float64 { // the format's logistic for z < 0 and z ≥ 0
		if z < 0 {
			return math.Exp(z) / (1 + math.Exp(z))
		}
		return 1 / (1 + math.Exp(-z))
	}
	// P001: bearing_temp_c 80.5 > 68.5, vibration_rms 3.23 > 2.25: leaf 2, z = 2 − 0.5.
	p := sig(1.5)
	assert.Equal(t, []string{"P001", num(1 - p), num(p), "bearing_wear"}, recs[1])
	// P002: bearing_temp_c 48.9 <= 68.5: leaf −1.5, z = −2.
	p = sig(-2)
	assert.Equal(t, []string{"P002", num(1 - p), num(p), "healthy"}, recs[2])
	// P004: bearing_temp_c missing goes right (missing_left false); vibration 4.13 > 2.25.
	p = sig(1.5)
	assert.Equal(t, []string{"P004", num(1 - p), num(p), "bearing_wear"}, recs[4])
}

// A regressor prints one column, "prediction" (design.md, "The command
// line").
func TestPredictRegression(t *testing.T) {
	model := filepath.Join(t.TempDir(), "flow.json")
	code, _, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "flow_m3h", "--ignore", "pump_id,state", "--trees", "10", "-o", model)
	require.Equal(t, 0, code, errs)
	code, out, errs := sawmill(t, "predict", model, "testdata/readings.csv")
	require.Equal(t, 0, code, errs)
	recs := readCSV(t, out)
	require.Len(t, recs, 13)
	assert.Equal(t, []string{"prediction"}, recs[0])
	for _, r := range recs[1:] {
		v, err := strconv.ParseFloat(r[0], 64)
		require.NoError(t, err)
		assert.True(t, v >= 30 && v <= 75, "a mean of leaf means lies within the training targets: %v", v)
	}
}
