package main

import (
	"encoding/json"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// forest/testdata/pump.json is the format page's example: one tree, a split
// on bearing_temp_c and two leaves.
func TestInspectText(t *testing.T) {
	code, out, errs := sawmill(t, "inspect", "../../forest/testdata/pump.json")
	require.Equal(t, 0, code, errs)
	for _, want := range []string{
		"task       classification\n",
		"trees      1\n",
		"nodes      3 (1 split, 2 leaves)\n",
		"depth      min 1, mean 1.0, max 1\n",
		"outputs    3\n",
		`classes    "healthy", "imbalance", "bearing_wear"` + "\n",
		"combine    average\n",
		"transform  none\n",
		"precision  float64\n",
		"features   3, 1 used\n",
		"  vibration_rms     unused\n",
		"  bearing_temp_c   1 split\n",
		"provenance\n",
		`  trainer    "sawmill train"` + "\n",
		"  oob_error  0.043\n",
	} {
		assert.Contains(t, out, want)
	}
	assert.Regexp(t, `file       \.\./\.\./forest/testdata/pump\.json, \d+ bytes\n`, out)
}

// inspect --json: counts that must agree with each other for binary trees
// (every split has two children) and with the flags used to train.
func TestInspectJSON(t *testing.T) {
	model := filepath.Join(t.TempDir(), "m.json")
	code, _, errs := sawmill(t, "train", "testdata/pumps.csv", "--label", "state", "--ignore", "pump_id", "--trees", "7", "--max-depth", "4", "-o", model)
	require.Equal(t, 0, code, errs)
	code, out, errs := sawmill(t, "inspect", model, "--json")
	require.Equal(t, 0, code, errs)
	var d inspectDoc
	require.NoError(t, json.Unmarshal([]byte(out), &d))
	assert.Equal(t, 7, d.Trees)
	assert.Equal(t, d.Nodes, 2*d.Leaves-1-(d.Trees-1), "binary trees: nodes = 2·leaves − trees")
	assert.LessOrEqual(t, d.Depth.Max, 4)
	assert.LessOrEqual(t, d.Depth.Min, d.Depth.Max)
	splits := 0
	for _, f := range d.Features {
		splits += f.Splits
	}
	assert.Equal(t, d.Nodes-d.Leaves, splits, "every split tests one feature")
	assert.Greater(t, d.Bytes, int64(0))
	var prov map[string]json.RawMessage
	require.NoError(t, json.Unmarshal(d.Provenance, &prov))
	assert.Contains(t, prov, "oob_error")

	code, text, errs := sawmill(t, "inspect", model)
	require.Equal(t, 0, code, errs)
	assert.Contains(t, text, "  oob_curve ")
	assert.Contains(t, text, "  importance  top: ")
}

// --c-sizes prints each C layout's table bytes (the constant-time walk and the packed table and
// binned layouts too), double and float, and the Cortex-M4 and M0 flash when arm-none-eabi-gcc is
// installed (.ci/setup installs it).
func TestInspectCSizes(t *testing.T) {
	code, out, errOut := sawmill(t, "inspect", "../../forest/testdata/pump.json", "--c-sizes")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	flat := strings.Join(strings.Fields(out), " ") // the columns' widths follow the longest name
	for _, want := range []string{"double nested", "double table", "float table", "double bitvector", "double binned-ct", "float binned-ct",
		"double packed table", "float packed binned", "bytes/node", "splits", "stack", "M0 flash"} {
		if !strings.Contains(flat, want) {
			t.Errorf("missing %q in:\n%s", want, out)
		}
	}
	if _, err := exec.LookPath("arm-none-eabi-gcc"); err == nil && strings.Contains(out, "not on PATH") {
		t.Errorf("arm-none-eabi-gcc is installed but no flash sizes were printed:\n%s", out)
	}
	if _, err := exec.LookPath("qemu-system-arm"); err == nil && strings.Contains(out, "no instruction counts") {
		t.Errorf("qemu-system-arm is installed but no instruction counts were printed:\n%s", out)
	}
}
