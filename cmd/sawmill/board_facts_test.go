package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/internal/testenv"
	"github.com/sawmill-dev/sawmill/verify"
)

// --board-facts writes into NAME.h the flash of the very file written:
// the test compiles the emitted bc.c itself with the Cortex-M4 flags and
// requires the header's figures, and an instruction count from QEMU.
func TestCompileBoardFacts(t *testing.T) {
	testenv.Tool(t, verify.ARMCompiler, "Debian package gcc-arm-none-eabi")
	testenv.Tool(t, "qemu-system-arm", "Debian package qemu-system-arm")
	dir := t.TempDir()
	code, _, errOut := sawmill(t, "compile", "../../golden/testdata/sklearn-breast-cancer/model.json", "--target", "c",
		"--layout", "binned", "--name", "bc", "--board-facts", "-o", dir)
	require.Equal(t, 0, code, errOut)
	h, err := os.ReadFile(filepath.Join(dir, "bc.h"))
	require.NoError(t, err)
	m := regexp.MustCompile(`Cortex-M4 \(.*\): flash (\d+) B \(\.text (\d+), \.rodata (\d+)\)`).FindSubmatch(h)
	require.NotNil(t, m, "no Cortex-M4 flash in bc.h:\n%s", h)
	args := append(append([]string{}, verify.ARMFlags...), "-c", "-o", "bc.o", "bc.c")
	cmd := exec.Command(verify.ARMCompiler, args...)
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	require.NoError(t, err, "%s", out)
	obj, err := verify.ObjectSizes(filepath.Join(dir, "bc.o"))
	require.NoError(t, err)
	require.Equal(t, strconv.Itoa(obj.Text), string(m[2]), "the header's .text is not the emitted file's")
	require.Equal(t, strconv.Itoa(obj.Rodata), string(m[3]), "the header's .rodata is not the emitted file's")
	for _, want := range []string{"Cortex-M0 (", "stack ", "bc_predict", "Cortex-M0 -Os "} {
		require.Contains(t, string(h), want)
	}
	n := regexp.MustCompile(`Cortex-M0 -Os (\d+) / (\d+)\.`).FindSubmatch(h)
	require.NotNil(t, n, "no M0 instruction count in bc.h")
	mean, _ := strconv.Atoi(string(n[1]))
	worst, _ := strconv.Atoi(string(n[2]))
	require.Positive(t, mean)
	require.GreaterOrEqual(t, worst, mean)
	require.False(t, strings.Contains(string(h), "inspect --c-sizes (emitting"), "the pointer stays beside the facts")
}

// --board-facts is the C target's alone.
func TestCompileBoardFactsCOnly(t *testing.T) {
	code, _, errOut := sawmill(t, "compile", "../../forest/testdata/pump.json", "--target", "go", "--board-facts", "-o", t.TempDir())
	require.NotEqual(t, 0, code)
	require.Contains(t, errOut, "--board-facts (c only)")
}
