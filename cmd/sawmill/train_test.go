package main

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/spf13/cobra"
	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// `sawmill train` on a classification table (design.md, "The command line"
// and "Training").
func TestTrainClassifier(t *testing.T) {
	dir := t.TempDir()
	model := filepath.Join(dir, "pump-health.json")
	code, out, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id",
		"--trees", "40", "--seed", "3", "-o", model)
	require.Equal(t, 0, code, errs)
	assert.Empty(t, errs, "no progress bar when stderr is not a terminal")
	assert.Contains(t, out, "trained 40 trees on testdata/pumps.csv: 160 rows, 5 features, 4 classes\n")
	assert.Contains(t, out, "out-of-bag error ")
	assert.Contains(t, out, "most important: ")
	assert.Contains(t, out, "wrote "+model+"\n")

	f, err := forest.ReadFile(model)
	require.NoError(t, err)
	assert.Len(t, f.Trees, 40)
	assert.Equal(t, []string{"vibration_rms", "bearing_temp_c", "motor_current_a", "flow_m3h", "suction_pressure_kpa"}, f.Features)
	assert.Equal(t, []string{"bearing_wear", "cavitation", "healthy", "misalignment"}, f.Classes, "classes in sorted order")
	var prov struct {
		Trainer  string  `json:"trainer"`
		OOBError float64 `json:"oob_error"`
		Settings struct {
			Trees int    `json:"trees"`
			Seed  uint64 `json:"seed"`
			Mtry  int    `json:"mtry"`
		} `json:"settings"`
	}
	require.NoError(t, json.Unmarshal(f.Provenance, &prov))
	assert.Equal(t, "sawmill train", prov.Trainer)
	assert.Equal(t, 40, prov.Settings.Trees)
	assert.Equal(t, uint64(3), prov.Settings.Seed)
	assert.Equal(t, 2, prov.Settings.Mtry, "⌊√5⌋ (Breiman 2001)")
	// The rule behind the invented data is simple, so a forest learns it well.
	assert.Less(t, prov.OOBError, 0.25)

	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	assert.Len(t, entries, 1, "no temporary file is left beside the model")
}

// The same seed gives the same bytes whatever --threads says (design.md,
// "Training").
func TestTrainDeterministic(t *testing.T) {
	dir := t.TempDir()
	var models [][]byte
	for _, threads := range []string{"1", "2", "5"} {
		model := filepath.Join(dir, "m"+threads+".json")
		code, _, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id",
			"--trees", "25", "--threads", threads, "-o", model)
		require.Equal(t, 0, code, errs)
		b, err := os.ReadFile(model)
		require.NoError(t, err)
		models = append(models, b)
	}
	assert.True(t, bytes.Equal(models[0], models[1]))
	assert.True(t, bytes.Equal(models[0], models[2]))
}

// A numeric label gives a regression (design.md, "Training"); --max-depth
// caps the depth.
func TestTrainRegression(t *testing.T) {
	model := filepath.Join(t.TempDir(), "flow.json")
	code, out, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "flow_m3h", "--ignore", "pump_id,state",
		"--trees", "30", "--max-depth", "6", "--min-leaf", "3", "--sample-fraction", "0.8", "-o", model)
	require.Equal(t, 0, code, errs)
	assert.Contains(t, out, "160 rows, 4 features, regression")
	assert.Contains(t, out, "out-of-bag MSE ")
	assert.Contains(t, out, "R² ")
	f, err := forest.ReadFile(model)
	require.NoError(t, err)
	assert.Equal(t, forest.Regression, f.Task)
	assert.Nil(t, f.Classes)
	st := forestStats(f)
	assert.LessOrEqual(t, st.depthMax, 6)
}

// A failed run never leaves a half-written or stale-replaced model: the old
// file stays as it was, and no temporary file is left behind.
func TestTrainFailureLeavesOutputAlone(t *testing.T) {
	dir := t.TempDir()
	model := filepath.Join(dir, "model.json")
	old := []byte("previous model\n")
	require.NoError(t, os.WriteFile(model, old, 0o644))
	code, _, errs := sawmill(t, "train", "testdata/bad_cell.csv", "--label", "state", "-o", model, "--force")
	require.Equal(t, 1, code)
	assert.Contains(t, errs, "bad_cell.csv:3:")
	got, err := os.ReadFile(model)
	require.NoError(t, err)
	assert.Equal(t, old, got)

	// The write itself fails (the target is a folder): the error names the
	// output and the temporary file is removed.
	target := filepath.Join(dir, "taken")
	require.NoError(t, os.Mkdir(target, 0o755))
	code, _, errs = sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id", "--trees", "3", "-o", target)
	require.Equal(t, 1, code)
	assert.True(t, strings.HasPrefix(errs, "sawmill: "+target+": "), errs)
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	assert.Equal(t, []string{"model.json", "taken"}, names)
}

// The hook for extra outputs of train: an output declares its flag, checks
// before training and writes after the model is written.
func TestTrainOutputsHook(t *testing.T) {
	saved := trainOutputs
	defer func() { trainOutputs = saved }()
	var seen *trainRun
	checked := false
	trainOutputs = append(trainOutputs, func(c *cobra.Command) trainOutput {
		on := c.Flags().Bool("test-extra", false, "")
		return trainOutput{
			check: func(r *trainRun) error {
				checked = *on && r.Result == nil // before training
				return nil
			},
			write: func(r *trainRun) error {
				if *on {
					seen = r
				}
				return nil
			},
		}
	})
	model := filepath.Join(t.TempDir(), "m.json")
	code, _, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id", "--trees", "2", "-o", model, "--test-extra")
	require.Equal(t, 0, code, errs)
	require.NotNil(t, seen)
	assert.True(t, checked, "check ran before training")
	assert.Equal(t, model, seen.ModelPath)
	assert.Len(t, seen.Result.Forest.Trees, 2)
	_, err := os.Stat(seen.ModelPath)
	assert.NoError(t, err, "the model is written before the extra outputs run")
}

// The progress bar's drawing (sawmill's own format), and no bar off a
// terminal.
func TestProgressBar(t *testing.T) {
	var b bytes.Buffer
	p := &progressBar{w: &b, label: "training", unit: "trees", total: 4}
	p.update(1)
	p.update(2) // within 100 ms of the last draw: skipped
	p.update(4) // the last one is always drawn
	p.clear()
	assert.Equal(t, "\rtraining [=======>                      ] 1/4 trees"+
		"\rtraining [==============================] 4/4 trees\r\x1b[K", b.String())
	assert.False(t, isTerminal(&b))
}
