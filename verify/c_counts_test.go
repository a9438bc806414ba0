package verify

import (
	"context"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
)

// countForests are classification forests whose leaves are class shares
// c_j/n: scikit-learn's on the Breast Cancer Wisconsin (Diagnostic) data
// (Wolberg, Street and Mangasarian 1995; the golden fixture), and
// sawmill train's on the same data, fully grown and cut at depth 3 (bins
// or not), so n runs from 1 to hundreds.
func countForests(t *testing.T) map[string]*forest.Forest {
	dir := filepath.Join(goldenCases, "sklearn-breast-cancer")
	sk, err := forest.ReadFile(filepath.Join(dir, "model.json"))
	require.NoError(t, err)
	d, err := train.ReadCSVFile(filepath.Join(dir, "data.csv"), train.ReadOptions{Label: "label", Task: forest.Classification})
	require.NoError(t, err)
	out := map[string]*forest.Forest{"sklearn": sk}
	for name, s := range map[string]train.Settings{
		"grown":  {Trees: 12, Seed: 3, SkipImportance: true},
		"depth3": {Trees: 12, Seed: 4, MaxDepth: 3, SkipImportance: true},
		"bins15": {Trees: 12, Seed: 5, MaxDepth: 3, MaxBins: 15, SkipImportance: true},
	} {
		res, err := train.Train(d, s)
		require.NoError(t, err, name)
		out[name] = res.Forest
	}
	return out
}

// Stored as class counts and divided at run time, the leaves of the table
// and binned layouts give, on the golden rows and the probe rows, the same
// output bits as the same layouts with the leaf values stored, in double
// and float builds, and the double build the interpreter's bit for bit.
// The emitted C must be the counting kind, so the comparison tests it.
func TestCCountLeavesExact(t *testing.T) {
	requireC(t)
	r := testCRunner()
	for name, f := range countForests(t) {
		rows := leafCountRows(t, f)
		for _, variant := range r.Variants() {
			p, _, err := compile.Compile(f, r.CompileOptions(variant))
			require.NoError(t, err)
			for _, layout := range []string{emit.Table, emit.Binned} {
				t.Run(name+"/"+layout+"/"+variant, func(t *testing.T) {
					o := r.options(layout, variant)
					src := cSource(t, p, o)
					require.Contains(t, src, "as class counts", "the leaves must be stored as counts")
					counted, err := r.score(context.Background(), p, o, rows, t.TempDir(), cBuilds(cQuickMatrix), false)
					require.NoError(t, err)
					o.LeafValues = true
					require.NotContains(t, cSource(t, p, o), "as class counts")
					stored, err := r.score(context.Background(), p, o, rows, t.TempDir(), cBuilds(cQuickMatrix), false)
					require.NoError(t, err)
					requireSameBits(t, f, "counts give", counted, stored)
					if variant != "float" {
						want, wantCls := cReference(f, rows, false)
						m := Compare(want, counted.Outputs, wantCls, counted.Classes, f.NumOutputs(), true, 0)
						require.True(t, m.OK(), "%s", m)
					}
				})
			}
		}
	}
}

// leafCountRows are f's probe rows: a row reaching every leaf, and rows at
// the thresholds.
func leafCountRows(t *testing.T, f *forest.Forest) *forest.Rows {
	leaves, ths, _ := ProbeRows(f, 4000)
	rows := &forest.Rows{Features: f.Features}
	for i, x := range append(leaves, ths...) {
		rows.Values = append(rows.Values, x...)
		rows.Line = append(rows.Line, i+2)
	}
	require.NotZero(t, rows.Len())
	return rows
}

// cSource is the NAME.c that o writes for p.
func cSource(t *testing.T, p *compile.Program, o ctarget.Options) string {
	files, err := ctarget.Emit(p, o)
	require.NoError(t, err)
	for _, f := range files {
		if strings.HasSuffix(f.Name, ".c") && !strings.Contains(f.Name, "threads") {
			return string(f.Data)
		}
	}
	t.Fatal("no C file")
	return ""
}

// requireSameBits requires got's outputs to be stored's bit for bit, got
// being what how names ("counts give", "packed") and stored the build with
// the leaf values stored.
func requireSameBits(t *testing.T, f *forest.Forest, how string, got, stored *Result) {
	t.Helper()
	require.Equal(t, len(stored.Outputs), len(got.Outputs))
	for i := range stored.Outputs {
		if math.Float64bits(stored.Outputs[i]) != math.Float64bits(got.Outputs[i]) {
			t.Fatalf("output %d (row %d): %s %v, stored values %v", i, i/f.NumOutputs(), how, got.Outputs[i], stored.Outputs[i])
		}
	}
}
