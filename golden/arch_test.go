package golden

import (
	"bytes"
	"context"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// TestInterpreterArm64 builds the interpreter for arm64 (internal/predicthex),
// runs it under qemu-aarch64 on every golden case, and holds each output
// against the interpreter here: Go fuses x*y+z into one instruction on
// arm64, so an expression the interpreter did not guard would change a bit
// there. Bit for bit, except two things that are arm64's and not sawmill's:
// a NaN's sign (an invalid operation gives a NaN whose sign bit is set on
// x86-64 and clear on Arm, IEEE 754 leaving it open), and outputs through
// math.Exp, which is assembly of each architecture's own (measured 2 ulp
// apart on these cases), held within ctarget.ErrorBound, the bound for two
// exps each within 1 ulp of e^x. Cost: one arm64 build of a small program
// (about 10 s cold) and one emulated run (about 40 s on two busy cores).
func TestInterpreterArm64(t *testing.T) {
	if testing.Short() {
		t.Skip("arm64 interpreter: runs without -short")
	}
	testenv.Tool(t, "qemu-aarch64", "Debian package qemu-user")
	cases, err := goldencase.Cases("testdata")
	if err != nil {
		t.Fatal(err)
	}
	bin := filepath.Join(t.TempDir(), "predicthex")
	build := exec.Command("go", "build", "-o", bin, "../internal/predicthex")
	build.Env = append(os.Environ(), "GOARCH=arm64", "CGO_ENABLED=0")
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("go build for arm64: %v\n%s", err, out)
	}
	args := []string{bin}
	var want []string
	bounds := map[string]float64{}
	for _, c := range cases {
		if c.LoadErr != nil {
			continue
		}
		args = append(args, c.Dir)
		want = append(want, hostLines(t, c, bounds)...)
	}
	var stdout, stderr bytes.Buffer
	run := exec.CommandContext(context.Background(), "qemu-aarch64", args...)
	run.Stdout, run.Stderr = &stdout, &stderr
	if err := run.Run(); err != nil {
		t.Fatalf("qemu-aarch64 predicthex: %v\n%s", err, stderr.Bytes())
	}
	got := strings.Split(strings.TrimSuffix(stdout.String(), "\n"), "\n")
	if len(got) != len(want) {
		t.Fatalf("arm64 printed %d lines, want %d", len(got), len(want))
	}
	exact, within := 0, 0
	for i := range want {
		switch ok, bitwise := sameLine(want[i], got[i], bounds); {
		case !ok:
			t.Errorf("arm64 interpreter differs:\n  amd64 %s\n  arm64 %s", want[i], got[i])
		case bitwise:
			exact++
		default:
			within++
		}
	}
	t.Logf("%d rows bit for bit, %d within the exp bound (NaN signs aside)", exact, within)
}

// hostLines is predicthex's output for c computed here, and records in
// bounds the exp bound of c's model by case name.
func hostLines(t *testing.T, c *goldencase.Case, bounds map[string]float64) []string {
	p, _, err := compile.Compile(c.Model, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	name := filepath.Base(c.Dir)
	bounds[name] = ctarget.ErrorBound(p, false)
	return goldencase.HexLines(name, c.Model, c.Rows)
}

// sameLine compares two predicthex lines: ok when every output has the same
// bits, or both are NaNs, or they are within the case's exp bound; bitwise
// when every output has the same bits.
func sameLine(want, got string, bounds map[string]float64) (ok, bitwise bool) {
	if want == got {
		return true, true
	}
	w, g := strings.Fields(want), strings.Fields(got)
	if len(w) != len(g) || len(w) < 3 || w[0] != g[0] || w[1] != g[1] || w[2] != g[2] {
		return false, false
	}
	for j := 3; j < len(w); j++ {
		a, err1 := strconv.ParseUint(w[j], 16, 64)
		b, err2 := strconv.ParseUint(g[j], 16, 64)
		if err1 != nil || err2 != nil {
			return false, false
		}
		x, y := math.Float64frombits(a), math.Float64frombits(b)
		if a != b && !(math.IsNaN(x) && math.IsNaN(y)) && !(math.Abs(x-y) <= bounds[w[0]]) {
			return false, false
		}
	}
	return true, false
}
