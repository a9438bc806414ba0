package source

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// The fixtures under testdata/xgboost were made by scripts/xgboost_fixtures.py
// with XGBoost itself (1.7.4, Debian's python3-xgboost, in x17_*; 2.1.4 in x2_*; 3.2.0 from
// the Python package index in x3_*). Each holds the saved model, rows, and
// the library's own margins and predictions.

// xgbMeta is a fixture's meta.json: what the script trained and how it
// predicted (Missing: the sentinel passed to XGBoost as missing=, if any).
type xgbMeta struct {
	Objective, Xgboost string
	Missing            *float64
}

func readMeta(t *testing.T, dir string) xgbMeta {
	var m xgbMeta
	data, err := os.ReadFile(filepath.Join(dir, "meta.json"))
	require.NoError(t, err)
	require.NoError(t, json.Unmarshal(data, &m))
	return m
}

type xgbFixture struct {
	dir    string
	meta   xgbMeta
	rows   *forest.Rows
	margin [][]float64
	pred   [][]float64
}

// xgbFixtures lists the fixture folders: the committed ones, or, when
// SAWMILL_XGBOOST_FIXTURES names a folder, the fixtures that
// scripts/xgboost_live_check.py has just made there with the installed
// XGBoost.
func xgbFixtures(t *testing.T) []string {
	root := filepath.Join("testdata", "xgboost")
	if d := os.Getenv("SAWMILL_XGBOOST_FIXTURES"); d != "" {
		root = d
	}
	dirs, err := filepath.Glob(filepath.Join(root, "x*"))
	require.NoError(t, err)
	var out []string
	for _, d := range dirs {
		if !strings.Contains(filepath.Base(d), "_refuse_") {
			out = append(out, d)
		}
	}
	require.NotEmpty(t, out, "no XGBoost fixtures: run scripts/xgboost_fixtures.py")
	return out
}

// readFloats reads a CSV of numbers written by the fixture script (Python's
// repr: exact), an empty cell being NaN.
func readFloats(t *testing.T, path string) [][]float64 {
	fh, err := os.Open(path)
	require.NoError(t, err)
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	require.NoError(t, err)
	var out [][]float64
	for _, r := range recs[1:] {
		row := make([]float64, len(r))
		for i, s := range r {
			v, msg := forest.ParseCell(s)
			require.Empty(t, msg, "%s: %q", path, s)
			row[i] = v
		}
		out = append(out, row)
	}
	return out
}

func loadFixture(t *testing.T, dir string, f *forest.Forest) *xgbFixture {
	x := &xgbFixture{dir: dir, meta: readMeta(t, dir)}
	var err error
	x.rows, err = forest.ReadRowsFile(filepath.Join(dir, "rows.csv"), f.Features, forest.RowOptions{})
	require.NoError(t, err)
	x.margin = readFloats(t, filepath.Join(dir, "margins.csv"))
	x.pred = readFloats(t, filepath.Join(dir, "predictions.csv"))
	require.Equal(t, x.rows.Len(), len(x.margin))
	require.Equal(t, x.rows.Len(), len(x.pred))
	return x
}

// TestXGBoostFixtures holds the importer against XGBoost's own predictions:
// the interpreter's raw scores equal the library's margins bit for bit on
// every row (NaN cells, threshold and category probes included), and its
// outputs equal the library's predictions.
func TestXGBoostFixtures(t *testing.T) {
	dirs := xgbFixtures(t)
	ubj := 0
	for _, dir := range dirs {
		if _, err := os.Stat(filepath.Join(dir, "model.ubj")); err == nil {
			ubj++
		}
	}
	require.GreaterOrEqual(t, ubj, len(dirs)/4, "too few fixtures saved as UBJSON")
	for _, dir := range dirs {
		t.Run(filepath.Base(dir), func(t *testing.T) {
			forests := []*forest.Forest{}
			for _, file := range []string{"model.json", "model.ubj"} {
				if _, err := os.Stat(filepath.Join(dir, file)); err != nil && file == "model.ubj" {
					forests = append(forests, forests[0])
					continue
				}
				r, err := Load(filepath.Join(dir, file), "", Options{Missing: readMeta(t, dir).Missing})
				require.NoError(t, err)
				want := "xgboost-json"
				if file == "model.ubj" {
					want = "xgboost-ubjson"
				}
				require.Equal(t, want, r.Format)
				forests = append(forests, r.Forest)
			}
			f := forests[0]
			// the two encodings of one model give the same forest, but for
			// the format named in the provenance
			g := *forests[1]
			g.Provenance = f.Provenance
			require.True(t, reflect.DeepEqual(f, &g), "model.json and model.ubj read differently")
			x := loadFixture(t, dir, f)
			k := f.NumOutputs()
			raw := make([]float64, k)
			out := make([]float64, k)
			bad, badOut := 0, 0
			for i := 0; i < x.rows.Len(); i++ {
				row := x.rows.Row(i)
				f.PredictRaw(row, raw)
				require.Len(t, x.margin[i], k, "row %d", i)
				for j := range raw {
					if math.Float64bits(raw[j]) != math.Float64bits(x.margin[i][j]) && bad < 5 {
						t.Errorf("row %d (line %d) output %d: margin %v, XGBoost %v", i, x.rows.Line[i], j, raw[j], x.margin[i][j])
					}
				}
				if !equalBits(raw, x.margin[i]) {
					bad++
				}
				f.Predict(row, out)
				if !predictionMatches(t, f, x.meta.Objective, out, raw, x.pred[i]) {
					if badOut < 5 {
						t.Errorf("row %d (line %d): outputs %v, XGBoost predicts %v", i, x.rows.Line[i], out, x.pred[i])
					}
					badOut++
				}
			}
			require.Zero(t, bad, "rows whose margins differ from XGBoost's")
			require.Zero(t, badOut, "rows whose predictions differ from XGBoost's")
		})
	}
}

func equalBits(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

// predictionMatches compares sawmill's outputs with what XGBoost's predict()
// returned: bit for bit, except where XGBoost's prediction is not the model's
// output (multi:softmax predicts the class, binary:hinge the 0/1 step).
func predictionMatches(t *testing.T, f *forest.Forest, objective string, out, raw, want []float64) bool {
	switch objective {
	case "multi:softmax":
		return len(want) == 1 && float64(f.ClassOf(out)) == want[0]
	case "binary:hinge":
		step := 0.0
		if raw[0] > 0 {
			step = 1
		}
		return len(want) == 1 && step == want[0]
	}
	return equalBits(out, want)
}

// TestXGBoostCategoryProbes checks that the categorical fixtures do test the
// category edges: rows reach set splits with negative, fractional, unseen
// (never trained) and huge (2^24 and above) values, which XGBoost sends to
// the side of the categories it does not list.
func TestXGBoostCategoryProbes(t *testing.T) {
	for _, d := range []string{"x17_categorical", "x3_categorical"} {
		dir := filepath.Join("testdata", "xgboost", d)
		r, err := Load(filepath.Join(dir, "model.json"), "", Options{})
		require.NoError(t, err)
		f := r.Forest
		x := loadFixture(t, dir, f)
		hits := map[string]int{}
		for i := 0; i < x.rows.Len(); i++ {
			row := x.rows.Row(i)
			for ti := range f.Trees {
				tr := &f.Trees[ti]
				for n := 0; tr.Left[n] != -1; {
					if tr.IsSetSplit(n) {
						switch v := forest.Round32(row[tr.Feature[n]]); {
						case v < 0:
							hits["negative"]++
						case v >= 1<<24:
							hits["huge"]++
						case v != math.Trunc(v):
							hits["fractional"]++
						case v > 9: // bmi_decile takes 0 to 9 in training
							hits["unseen"]++
						}
					}
					if f.GoesLeft(tr, n, row) {
						n = tr.Left[n]
					} else {
						n = tr.Right[n]
					}
				}
			}
		}
		for _, k := range []string{"negative", "huge", "fractional", "unseen"} {
			require.NotZero(t, hits[k], "%s: no row reaches a categorical split with a %s value", d, k)
		}
	}
}
