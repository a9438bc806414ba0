package verify

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// asmTarget is a compiler and the conditional branches of its disassembly
// (the instruction after the tab objdump prints): x86-64 Jcc (Intel SDM
// vol. 2, "Jcc"), Thumb B<cond>, CBZ and CBNZ (Arm ARM v7-M, A7.7.12 and
// A7.7.21), RISC-V B* and their pseudo-instructions (RISC-V unprivileged
// ISA, 2.5 and chapter 25).
type asmTarget struct {
	name, cc, objdump string
	flags             []string
	branch            *regexp.Regexp
}

var asmTargets = []asmTarget{
	{"x86-64", "gcc", "objdump", []string{"-O2"}, regexp.MustCompile(`^j(?:[a-ln-z]|m[^p])[a-z]*\s`)},
	{"cortex-m0", "arm-none-eabi-gcc", "arm-none-eabi-objdump", []string{"-Os", "-mcpu=cortex-m0", "-mthumb", "-mfloat-abi=soft"},
		regexp.MustCompile(`^(?:b(?:eq|ne|cs|cc|hs|lo|mi|pl|vs|vc|hi|ls|ge|lt|gt|le)(?:\.n|\.w)?|cbn?z)\s`)},
	{"cortex-m4", "arm-none-eabi-gcc", "arm-none-eabi-objdump", []string{"-O2", "-mcpu=cortex-m4", "-mthumb", "-mfloat-abi=hard", "-mfpu=fpv4-sp-d16"},
		regexp.MustCompile(`^(?:b(?:eq|ne|cs|cc|hs|lo|mi|pl|vs|vc|hi|ls|ge|lt|gt|le)(?:\.n|\.w)?|cbn?z)\s`)},
	{"rv32", "riscv64-unknown-elf-gcc", "riscv64-unknown-elf-objdump", []string{"-O2", "-march=rv32imac", "-mabi=ilp32", "--specs=picolibc.specs"},
		regexp.MustCompile(`^b(?:eq|ne|lt|ge|ltu|geu|eqz|nez|lez|gez|ltz|gtz|gt|le|gtu|leu)\s`)},
}

// branchesPerFunction compiles NAME.c of files for a, every function out
// of line, and counts the conditional branches in each function.
func branchesPerFunction(t *testing.T, a asmTarget, files []emit.File) map[string]int {
	dir := t.TempDir()
	for _, f := range files {
		require.NoError(t, os.WriteFile(filepath.Join(dir, f.Name), f.Data, 0o644))
	}
	args := append(slices.Clone(a.flags), "-std=c99", "-fno-inline", "-c", cName+".c", "-o", "m.o")
	cmd := exec.Command(a.cc, args...)
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	require.NoError(t, err, "%s", out)
	dump, err := exec.Command(a.objdump, "-d", "--no-show-raw-insn", filepath.Join(dir, "m.o")).Output()
	require.NoError(t, err)
	n := map[string]int{}
	fn := ""
	for _, line := range strings.Split(string(dump), "\n") {
		if strings.HasSuffix(line, ">:") {
			if sym := line[strings.Index(line, "<")+1 : len(line)-2]; !strings.HasPrefix(sym, ".L") { // a local label is within fn
				fn = sym
				n[fn] += 0
			}
			continue
		}
		if f := strings.SplitN(line, "\t", 2); len(f) == 2 && a.branch.MatchString(strings.TrimSpace(f[1])+" ") {
			n[fn]++
		}
	}
	return n
}

// ctHelpers are the constant-time C's helpers: each must compile to no
// conditional branch at all.
var ctHelpers = []string{"lt32", "lt64", "eq32", "eq64", "sel32", "sel64", "bits", "is_nan", "key", "key32", "pow2", "round32"}

// The compiler does not turn the constant-time C's masks back into
// branches: on x86-64, the Cortex-M0, the Cortex-M4 and RV32, with every
// function kept out of line, the helpers (comparisons, selections, keys,
// the rounding of a double to a float) have no conditional branch, and
// NAME_bins and NAME_predict have only their loops' (bins: over features,
// the features without cuts, and the halvings, at most 5 however the
// compiler lays the loops out; predict: over trees and
// steps, and over outputs where there are several). The ordinary binned
// layout's key and rounding do branch, so the count can fail. Under QEMU,
// TestCountConstantTime measures the whole prediction.
func TestConstantTimeBranches(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join(goldenCases, "sklearn-breast-cancer", "model.json"))
	require.NoError(t, err)
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	for _, a := range asmTargets {
		t.Run(a.name, func(t *testing.T) {
			if _, err := exec.LookPath(a.cc); err != nil {
				if requireEngines {
					t.Fatalf("%s is not on PATH, and SAWMILL_REQUIRE_ENGINES is set", a.cc)
				}
				t.Skipf("%s is not on PATH", a.cc)
			}
			ct, err := ctarget.Emit(p, ctarget.Options{Name: cName, ConstantTime: true})
			require.NoError(t, err)
			n := branchesPerFunction(t, a, ct)
			t.Logf("conditional branches per function: %v", n)
			for fn, c := range n { // a clone is fn.constprop.0 or the like
				if base, _, _ := strings.Cut(fn, "."); slices.Contains(ctHelpers, strings.TrimPrefix(base, cName+"_")) {
					require.Zero(t, c, "%s branches", fn)
				}
			}
			require.Contains(t, n, cName+"_round32", "a float32 model's double build rounds on the bits")
			require.LessOrEqual(t, n[cName+"_bins"], 5) // loops over features (entry and back), len == 0, halvings (entry and back)
			require.LessOrEqual(t, n[cName+"_predict"], 4)
			plain, err := ctarget.Emit(p, ctarget.Options{Name: cName, Layout: emit.Binned})
			require.NoError(t, err)
			pn := branchesPerFunction(t, a, plain)
			t.Logf("binned layout: %v", pn)
			require.Positive(t, pn[cName+"_round32"], "the binned layout's rounding branches: the check must see it")
		})
	}
}
