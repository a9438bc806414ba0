package verify

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// The binned C layout against the interpreter at every threshold's
// neighbours: the doubles a few steps below, at and above it, its float32
// neighbours, ±0, NaN, ±Inf, subnormals, the zero band's and the missing
// value's edges, in float64 and float32 models, with missing values going
// both ways, zero as missing on some splits and a missing_value, compiled
// and run as C (double and float builds) and compared bit for bit.

// binnedThresholds are thresholds where binning by IEEE bits could go
// wrong: signed zeros, subnormals of both types, the ends of float and
// double range, values just past float range (whose float32 "<" form is
// x < -FLT_MAX) and random doubles and floats, some repeated.
func binnedThresholds(rng *rand.Rand) []float64 {
	ts := []float64{0, math.Copysign(0, -1), 1, -1, 0.1, -0.1, 61.5, 1e-40, -1e-40, 5e-324, -5e-324, 0x1p-149, -0x1p-149,
		0x1p-126, math.MaxFloat32, -math.MaxFloat32, math.MaxFloat32 * 1.0000001, -math.MaxFloat32 * 1.0000001, 1e39, -1e39,
		1e300, -1e300, math.MaxFloat64, -math.MaxFloat64, forest.ZeroMissingBound, -forest.ZeroMissingBound, 16777217}
	for i := 0; i < 24; i++ {
		f := math.Float32frombits(rng.Uint32())
		if math.IsNaN(float64(f)) || math.IsInf(float64(f), 0) {
			continue
		}
		ts = append(ts, float64(f), math.Float64frombits(rng.Uint64()&^(0x7ff<<52)|uint64(rng.IntN(2046)+1)<<52))
	}
	return ts
}

// binnedForest has trees complete to depth 4 over three features, each
// split's threshold drawn from ts (so features share and repeat cuts),
// missing values going a random way, zero as missing on every third split
// when zm, and leaves of distinct values.
func binnedForest(t *testing.T, rng *rand.Rand, ts []float64, prec forest.Precision, zm bool, missing *float64) *forest.Forest {
	f := &forest.Forest{Task: forest.Regression, Features: []string{"a", "b", "c"}, Combine: forest.Sum, InputPrecision: prec}
	const depth = 4
	for ti := 0; ti < 12; ti++ {
		var nodes []cNode
		var zms []int
		splits := 1<<depth - 1
		for i := 0; i < 2*splits+1; i++ {
			if i >= splits {
				nodes = append(nodes, cLeaf(float64(ti*32+i)*0.25))
				continue
			}
			nodes = append(nodes, cSplit(rng.IntN(3), ts[rng.IntN(len(ts))], 2*i+1, 2*i+2, rng.IntN(2) == 0))
			if zm && i%3 == 0 {
				zms = append(zms, i)
			}
		}
		f.Trees = append(f.Trees, v2Tree(nodes, zms...))
	}
	if missing != nil {
		f.HasMissingValue, f.MissingValue = true, *missing
	}
	return mustValidate(t, f)
}

// binnedRows walks every threshold: two doubles each side, the float32 it
// rounds to and that float's neighbours, and the special values.
func binnedRows(f *forest.Forest, ts []float64) *forest.Rows {
	vals := []float64{math.NaN(), 0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), 5e-324, -5e-324, 0x1p-149, -0x1p-149,
		math.Nextafter(forest.ZeroMissingBound, 1), math.Nextafter(-forest.ZeroMissingBound, -1), -999, math.Nextafter(-999, 0)}
	for _, th := range ts {
		vals = append(vals, walk(th, 2)...)
		t32 := float32(th)
		vals = append(vals, float64(t32), float64(math.Nextafter32(t32, float32(math.Inf(1)))), float64(math.Nextafter32(t32, float32(math.Inf(-1)))))
	}
	return valueRows(f, vals, 7)
}

// walk returns x and its n float64 neighbours on each side.
func walk(x float64, n int) []float64 {
	out := []float64{x}
	lo, hi := x, x
	for i := 0; i < n; i++ {
		lo, hi = math.Nextafter(lo, math.Inf(-1)), math.Nextafter(hi, math.Inf(1))
		out = append(out, lo, hi)
	}
	return out
}

// binnedCuts are the kinds of thresholds a double model's binned build
// stores as 32-bit keys, with the rounding each takes (the double build's
// NAME_round32), beside "any", which keeps 64-bit keys.
var binnedCuts = []struct{ name, round string }{{"any", ""}, {"float", "up"}, {"below-float", "down"}}

// cutsOf turns ts into thresholds of the kind named: float values, or the
// double just below one (the x <= t form of x < float).
func cutsOf(ts []float64, kind string) []float64 {
	if kind == "any" {
		return ts
	}
	var out []float64
	for _, t := range ts {
		f := float32(t)
		if math.IsInf(float64(f), 0) {
			continue
		}
		if kind == "below-float" {
			out = append(out, math.Nextafter(float64(f), math.Inf(-1)))
		} else {
			out = append(out, float64(f))
		}
	}
	return out
}

func TestCBinnedNeighbours(t *testing.T) {
	testenv.Need(t, cTools(testConfig.AllCompilers))
	for _, c := range neighbourForests(t, 1, 2) {
		t.Run(fmt.Sprintf("seed%d-%s", c.seed, c.name), func(t *testing.T) {
			t.Parallel()
			requireRound(t, c.f, c.round)
			checkBinned(t, c.f, c.rows)
		})
	}
}

// neighbourForest is one forest of the neighbour-walking tests: its
// thresholds of one kind (binnedCuts), the rows around each, and the
// rounding the binned layout's double build must choose.
type neighbourForest struct {
	name  string // precision, format 2 or not, kind of cut
	seed  uint64
	f     *forest.Forest
	rows  *forest.Rows
	round string
}

// neighbourForests are the forests the neighbour-walking tests score, per
// seed: float64 and float32 models, format 1 and format 2 (with a missing
// value sentinel), and each kind of cut (a float32 model's double build
// has no below-float cuts: it rounds to nearest, or keeps 64 bits).
func neighbourForests(t *testing.T, seeds ...uint64) []neighbourForest {
	mv := -999.0
	var out []neighbourForest
	for _, seed := range seeds {
		for _, prec := range []forest.Precision{forest.Float64, forest.Float32} {
			for _, v2 := range []bool{false, true} {
				for _, kind := range binnedCuts {
					if prec == forest.Float32 && kind.name == "below-float" {
						continue
					}
					rng := rand.New(rand.NewPCG(seed, 14))
					ts := cutsOf(binnedThresholds(rng), kind.name)
					var missing *float64
					if v2 {
						missing = &mv
					}
					f := binnedForest(t, rng, ts, prec, v2, missing)
					round := kind.round
					if prec == forest.Float32 {
						round = "nearest" // when the float32 pass made midpoints
					}
					out = append(out, neighbourForest{name: fmt.Sprintf("%s-v2=%v-%s", prec, v2, kind.name), seed: seed,
						f: f, rows: binnedRows(f, ts), round: round})
				}
			}
		}
	}
	return out
}

// requireRound checks that f's double build of the binned layout rounds
// its inputs to floats as round says ("" for 64-bit keys), so the
// neighbour walk tests the 32-bit keys it means to.
func requireRound(t *testing.T, f *forest.Forest, round string) {
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	if round == "nearest" && !p.Midpoints32 {
		round = "" // thresholds past float range: no midpoints, 64-bit keys
	}
	files, err := ctarget.Emit(p, ctarget.Options{Name: cName, Layout: emit.Binned})
	require.NoError(t, err)
	src := string(files[len(files)-1].Data)
	for _, f := range files {
		if f.Name == cName+".c" {
			src = string(f.Data)
		}
	}
	if round == "" {
		require.False(t, strings.Contains(src, "_round32("), "64-bit keys expected")
		return
	}
	want := "rounded " + map[string]string{"up": "up", "down": "down", "nearest": "to nearest"}[round]
	require.True(t, strings.Contains(src, want), "the C does not say %q", want)
}

// checkBinned scores f in the binned layout, double and float builds, and
// compares with the interpreter bit for bit (float: within the float
// bound, the comparisons exact).
func checkBinned(t *testing.T, f *forest.Forest, rows *forest.Rows) {
	r := testCRunner()
	for _, variant := range r.Variants() {
		p, _, err := compile.Compile(f, r.CompileOptions(variant))
		require.NoError(t, err)
		res, err := r.Score(context.Background(), p, emit.Binned, variant, rows, t.TempDir())
		if variant == "float" && ctarget.FitsFloat(p) != nil {
			require.ErrorIs(t, err, ErrDeclined)
			continue
		}
		require.NoError(t, err, variant)
		want, wantCls := cReference(f, rows, variant == "float")
		exact, bound := r.Tolerance(variant, p)
		m := Compare(want, res.Outputs, wantCls, res.Classes, f.NumOutputs(), exact, bound)
		require.True(t, m.OK(), "%s: %s", variant, m)
		t.Logf("%s: %d rows, %s", variant, len(rows.Line), m)
	}
}

// softFloat matches the ARM EABI run-time routines of floating-point
// arithmetic, comparison and conversion, and softFloatCompare those that
// compare (ARM IHI 0043, "Run-time ABI for the ARM Architecture", section
// 4.1.2), which an FPU-less core calls for every such operation.
var (
	softFloat        = regexp.MustCompile(`__aeabi_(c?[df](add|sub|rsub|mul|div|neg|cmp\w*)|[df]2\w+|u?[il]2[df]|ul2[df])`)
	softFloatCompare = regexp.MustCompile(`__aeabi_c?[df]cmp\w*`)
)

// armCalls compiles the C file for an ARMv6-M core (Cortex-M0: no FPU),
// every function kept out of line, and returns per function the run-time
// routines it calls.
func armCalls(t *testing.T, files []emit.File, layout string) map[string][]string {
	for _, tool := range []string{"arm-none-eabi-gcc", "arm-none-eabi-objdump"} {
		testenv.Tool(t, tool, "Debian package gcc-arm-none-eabi: no ARMv6-M build")
	}
	dir := t.TempDir()
	for _, f := range files {
		require.NoError(t, os.WriteFile(filepath.Join(dir, f.Name), f.Data, 0o644))
	}
	obj := filepath.Join(dir, layout+".o")
	out, err := exec.Command("arm-none-eabi-gcc", "-std=c99", "-Os", "-mcpu=cortex-m0", "-mthumb", "-fno-inline", "-ffunction-sections",
		"-Wall", "-Werror", "-c", filepath.Join(dir, cName+".c"), "-o", obj).CombinedOutput()
	require.NoError(t, err, "%s", out)
	dump, err := exec.Command("arm-none-eabi-objdump", "-dr", obj).Output()
	require.NoError(t, err)
	calls := map[string][]string{}
	fn := ""
	for _, line := range strings.Split(string(dump), "\n") {
		if strings.HasSuffix(line, ">:") {
			fn = line[strings.Index(line, "<")+1 : len(line)-2]
		}
		if i := strings.Index(line, "R_ARM_"); i >= 0 {
			fs := strings.Fields(line[i:])
			calls[fn] = append(calls[fn], fs[len(fs)-1])
		}
	}
	return calls
}

// On an ARMv6-M core the binned layout's mapping of a row to bins calls no
// soft-float routine and its tree walk no soft-float comparison: only the
// leaf sums (the float leaves widened, added, averaged) are floating point. The table
// layout, which compares doubles, does call one, so the check can fail.
func TestCBinnedNoSoftFloatCompare(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join(goldenCases, "sklearn-breast-cancer", "model.json"))
	require.NoError(t, err)
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	for _, layout := range []string{emit.Binned, emit.Table} {
		files, err := ctarget.Emit(p, ctarget.Options{Name: cName, Layout: layout})
		require.NoError(t, err)
		calls := armCalls(t, files, layout)
		var hits []string
		for _, fn := range []string{cName + "_predict", cName + "_bins", cName + "_key", cName + "_is_nan", cName + "_bits", cName + "_round32", cName + "_key32"} {
			re := softFloat // the mapping: no floating point at all
			if fn == cName+"_predict" {
				re = softFloatCompare // the walk, beside the leaf sums
			}
			for _, c := range calls[fn] {
				if re.MatchString(c) {
					hits = append(hits, fn+": "+c)
				}
			}
		}
		t.Logf("%s: %v", layout, calls[cName+"_predict"])
		if layout == emit.Binned {
			require.Empty(t, hits, "the binned walk must not compare floating point")
			require.Contains(t, calls, cName+"_bins")
			require.Contains(t, calls, cName+"_round32", "a float32 model's double build rounds on the bits")
		} else {
			require.NotEmpty(t, hits, "the table layout compares doubles: the check must see it")
		}
	}
}

// With every feature declared integer (forest.WithIntegerFeatures), the
// binned C build of the floored model scores integer rows, at and around
// every floored threshold and at the ends of the int32 range, bit for bit
// as the interpreter scores the original model; the floored integer cuts
// are floats, so the double build stores 4-byte keys.
func TestCBinnedIntegerFeatures(t *testing.T) {
	testenv.Need(t, cTools(testConfig.AllCompilers))
	rng := rand.New(rand.NewPCG(5, 14))
	var ts []float64
	for i := 0; i < 40; i++ {
		ts = append(ts, float64(rng.IntN(2000)-1000)+[]float64{0, 0.5, 0.999, 0.001}[rng.IntN(4)])
	}
	f := binnedForest(t, rng, ts, forest.Float64, false, nil)
	g, changed, err := f.WithIntegerFeatures(f.Features)
	require.NoError(t, err)
	require.Positive(t, changed)
	vals := []float64{math.NaN(), 0, -1, 1, math.MinInt32, math.MaxInt32, -1 << 40, 1 << 40}
	for _, th := range ts {
		k := math.Floor(th)
		vals = append(vals, k-1, k, k+1)
	}
	rows := valueRows(f, vals, 7)
	requireRound(t, g, "up")
	r := testCRunner()
	p, _, err := compile.Compile(g, r.CompileOptions("double"))
	require.NoError(t, err)
	res, err := r.Score(context.Background(), p, emit.Binned, "double", rows, t.TempDir())
	require.NoError(t, err)
	want, wantCls := cReference(f, rows, false) // the original model
	m := Compare(want, res.Outputs, wantCls, res.Classes, f.NumOutputs(), true, 0)
	require.True(t, m.OK(), "%s", m)
	t.Logf("%d integer rows, %s", len(rows.Line), m)
}
