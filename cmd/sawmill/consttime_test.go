package main

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// --constant-time writes the binned layout's constant-time walk, whose
// header states the fixed count of splits; it refuses another layout, a
// budget and the targets it does not serve, saying why.
func TestCompileConstantTime(t *testing.T) {
	dir := t.TempDir()
	code, _, errOut := sawmill(t, "compile", pumpModel, "--target", "c", "--constant-time", "--name", "pump", "-o", dir)
	require.Equal(t, 0, code, errOut)
	h, err := os.ReadFile(filepath.Join(dir, "pump.h"))
	require.NoError(t, err)
	assert.Contains(t, string(h), "layout binned (constant time")
	assert.Contains(t, string(h), "Constant time: every prediction tests exactly")
	c, err := os.ReadFile(filepath.Join(dir, "pump.c"))
	require.NoError(t, err)
	assert.Contains(t, string(c), "pump_depth[")
	code, _, errOut = sawmill(t, "compile", pumpModel, "--target", "c", "--constant-time", "--layout", "table", "-o", t.TempDir())
	assert.Equal(t, 2, code)
	assert.Contains(t, errOut, "--constant-time writes the binned layout, not --layout table")
	code, _, errOut = sawmill(t, "compile", pumpModel, "--target", "c", "--constant-time", "--flash-budget", "100000", "-o", t.TempDir())
	assert.Equal(t, 2, code)
	assert.Contains(t, errOut, "--constant-time and a budget")
	code, _, errOut = sawmill(t, "compile", pumpModel, "--target", "go", "--constant-time", "-o", t.TempDir())
	assert.Equal(t, 2, code)
	assert.Contains(t, errOut, "--constant-time (c only)")
}
