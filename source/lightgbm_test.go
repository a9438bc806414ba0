package source

import (
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// lgbFixture is one folder of source/testdata/lightgbm, written by
// scripts/lightgbm_fixtures.py with lightgbm 4.7.0.
type lgbFixture struct {
	name  string
	dir   string
	model []byte
	meta  struct {
		Iterations int    `json:"iterations"`
		Error      string `json:"error"`
		Params     map[string]any
	}
}

func lgbFixtures(t *testing.T, root string) []lgbFixture {
	t.Helper()
	dirs, err := filepath.Glob(filepath.Join(root, "*", "model.txt"))
	require.NoError(t, err)
	require.NotEmpty(t, dirs, "no models under %s: run scripts/lightgbm_fixtures.py", root)
	var out []lgbFixture
	for _, m := range dirs {
		d := filepath.Dir(m)
		fx := lgbFixture{name: filepath.Base(d), dir: d}
		fx.model, err = os.ReadFile(m)
		require.NoError(t, err)
		meta, err := os.ReadFile(filepath.Join(d, "meta.json"))
		require.NoError(t, err)
		require.NoError(t, json.Unmarshal(meta, &fx.meta))
		out = append(out, fx)
	}
	return out
}

// readFloatCSV reads a CSV of numbers with a header; an empty cell is NaN.
func readFloatCSV(t *testing.T, path string) ([]string, [][]float64) {
	t.Helper()
	fh, err := os.Open(path)
	require.NoError(t, err)
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	require.NoError(t, err)
	var rows [][]float64
	for _, r := range recs[1:] {
		row := make([]float64, len(r))
		for j, s := range r {
			if s == "" {
				row[j] = math.NaN()
				continue
			}
			row[j], err = strconv.ParseFloat(s, 64)
			require.NoError(t, err, "%s: %q", path, s)
		}
		rows = append(rows, row)
	}
	return recs[0], rows
}

// ulps is the distance between a and b in units in the last place.
func ulps(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / (math.Nextafter(math.Abs(b), math.Inf(1)) - math.Abs(b))
}

// TestLightGBMFixtures holds the reader against lightgbm 4.7.0's own
// predictions: raw scores bit for bit on every row (held-out rows, rows at
// and around every threshold in float64 and float32, category edges, zeros,
// the zero band and NaN), and transformed outputs within lgbTransformULPs.
func TestLightGBMFixtures(t *testing.T) {
	worst := map[string]float64{}
	for _, fx := range lgbFixtures(t, filepath.Join("testdata", "lightgbm")) {
		t.Run(fx.name, func(t *testing.T) { worst[fx.name] = lgbCheck(t, fx) })
	}
	t.Logf("largest distance of a transformed output from LightGBM's, in ulps: %v", worst)
}

// TestLightGBMLive checks the models that scripts/lightgbm_live_check.py
// trains afresh with the installed lightgbm and writes under
// $SAWMILL_LIGHTGBM_LIVE, exactly as TestLightGBMFixtures checks the
// committed ones. The script sets the variable and runs this test.
func TestLightGBMLive(t *testing.T) {
	root := os.Getenv("SAWMILL_LIGHTGBM_LIVE")
	if root == "" {
		t.Skip("SAWMILL_LIGHTGBM_LIVE is not set: run scripts/lightgbm_live_check.py")
	}
	for _, fx := range lgbFixtures(t, root) {
		t.Run(fx.name, func(t *testing.T) { lgbCheck(t, fx) })
	}
}

// lgbCheck reads one model folder and holds the reader against LightGBM's
// outputs in it: raw scores bit for bit on every row (held-out rows, rows at
// and around every threshold in float64 and float32, category edges, zeros,
// the zero band and NaN), transformed outputs within lgbTransformULPs. It
// returns the largest distance of a transformed output, in ulps.
func lgbCheck(t *testing.T, fx lgbFixture) float64 {
	worst := 0.0
	require.True(t, detectLightGBM(fx.model))
	r, err := Decode(fx.model, "model.txt", "", Options{Iterations: fx.meta.Iterations})
	if fx.meta.Error != "" {
		require.Error(t, err)
		require.Contains(t, err.Error(), fx.meta.Error)
		require.True(t, strings.HasPrefix(err.Error(), "model.txt:"), err.Error())
		return 0
	}
	require.NoError(t, err)
	require.Equal(t, "lightgbm", r.Format)
	f := r.Forest
	_, rows := readFloatCSV(t, filepath.Join(fx.dir, "rows.csv"))
	head, want := readFloatCSV(t, filepath.Join(fx.dir, "expected.csv"))
	k := f.NumOutputs()
	require.Len(t, head, 2*k, "expected.csv has raw and transformed outputs")
	warned := false
	for _, n := range r.Notes {
		warned = warned || strings.HasPrefix(n, "warning:")
	}
	obj, _ := fx.meta.Params["objective"].(string)
	wantWarn := obj == "cross_entropy_lambda" || fx.meta.Params["reg_sqrt"] == true
	require.Equal(t, wantWarn, warned, "notes: %q", r.Notes)

	// Through compile: a program must score every row like the
	// interpreter, or compile must refuse with an error that names
	// what it lacks.
	p, _, cerr := compile.Compile(f, compile.Options{})
	// A version 1 model must compile; a format 2 construct the compiler
	// does not implement yet must be refused with a message that says so.
	// Whatever compiles is held against the interpreter below.
	switch {
	case cerr == nil:
	case len(f.V2Constructs()) > 0 && strings.Contains(cerr.Error(), "not supported"):
		p = nil
	default:
		require.NoError(t, cerr)
	}
	got := make([]float64, k)

	raw := make([]float64, k)
	out := make([]float64, k)
	for i, x := range rows {
		require.Len(t, x, len(f.Features))
		f.PredictRaw(x, raw)
		f.Predict(x, out)
		if p != nil {
			compile.Eval(p, x, got)
			for j := range k {
				require.Equal(t, math.Float64bits(out[j]), math.Float64bits(got[j]), "row %d, output %d: compiled %v, interpreter %v", i, j, got[j], out[j])
			}
		}
		for j := range k {
			w := want[i][j]
			if f.Combine == forest.Average {
				// LightGBM's raw_score=True gives the sum of an rf
				// model's trees; predict() divides it by the rounds
				// (measured with 4.7.0), as the format's average does.
				w /= float64(len(f.Trees) / k)
			}
			require.Equal(t, math.Float64bits(w), math.Float64bits(raw[j]),
				"row %d (line %d), output %d: raw %v, LightGBM %v", i, i+2, j, raw[j], w)
			if wantWarn {
				continue
			}
			u := ulps(out[j], want[i][k+j])
			worst = max(worst, u)
			require.LessOrEqual(t, u, float64(lgbTransformULPs), "row %d, output %d: %v, LightGBM %v", i, j, out[j], want[i][k+j])
		}
	}
	return worst
}

// lgbTransformULPs bounds the transformed outputs' distance from LightGBM's:
// LightGBM computes 1/(1+exp(-s·z)) for every z (the format's logistic takes
// e^z/(1+e^z) below 0) and glibc's exp where Go has its own (measured on
// the fixtures; the test logs the largest distance).
const lgbTransformULPs = 4

func TestLightGBMIterations(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("testdata", "lightgbm", "multiclass", "model.txt"))
	require.NoError(t, err)
	all, err := Decode(data, "model.txt", "lightgbm", Options{})
	require.NoError(t, err)
	two, err := Decode(data, "model.txt", "lightgbm", Options{Iterations: 2})
	require.NoError(t, err)
	require.Len(t, two.Forest.Trees, 2*3)
	require.Len(t, all.Forest.Trees, 3*3)
	for i, tr := range two.Forest.Trees {
		require.True(t, tr.HasOutput)
		require.Equal(t, i%3, tr.Output)
	}
	_, err = Decode(data, "model.txt", "lightgbm", Options{Iterations: 4})
	require.EqualError(t, err, "model.txt: iterations 4: the model has 3 rounds")
}

func TestLightGBMOptions(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("testdata", "lightgbm", "multiclass", "model.txt"))
	require.NoError(t, err)
	feats := []string{"a", "b", "c", "d", "e", "f", "g", "h"}
	m := -999.0
	r, err := Decode(data, "model.txt", "", Options{Features: feats, Classes: []string{"x", "y", "z"}, Missing: &m})
	require.NoError(t, err)
	require.Equal(t, feats, r.Forest.Features)
	require.Equal(t, []string{"x", "y", "z"}, r.Forest.Classes)
	require.True(t, r.Forest.HasMissingValue)
	require.Equal(t, -999.0, r.Forest.MissingValue)
	require.Equal(t, forest.MatchTruncate, r.Forest.CategoryMatch)
	var prov map[string]any
	require.NoError(t, json.Unmarshal(r.Forest.Provenance, &prov))
	require.Equal(t, "multiclass num_class:3", prov["objective"])
	require.Equal(t, "lightgbm", prov["source"])

	// The sentinel goes where LightGBM sends NaN.
	x := make([]float64, 8)
	for i := range x {
		x[i] = 0.5
	}
	y := append([]float64(nil), x...)
	x[2], y[2] = math.NaN(), m
	a, b := make([]float64, 3), make([]float64, 3)
	r.Forest.PredictRaw(x, a)
	r.Forest.PredictRaw(y, b)
	require.Equal(t, a, b)

	_, err = Decode(data, "model.txt", "", Options{Features: feats[:3]})
	require.EqualError(t, err, "model.txt: --features names 3 features, the model has 8")
	_, err = Decode(data, "model.txt", "", Options{Classes: []string{"x"}})
	require.EqualError(t, err, "model.txt: --classes names 1 classes, the model has 3")
}

// TestLightGBMZeroThreshold walks the zero band: for thresholds inside and
// at the edges of [-B, B], LightGBM's rule (a value with |x| <= B compared
// as 0) and the rewritten threshold agree on every probe.
func TestLightGBMZeroThreshold(t *testing.T) {
	B := lgbZeroBound
	ts := []float64{0, math.Copysign(0, -1), 1e-37, -1e-37, B, -B, lgbFloatBelow(B), math.Nextafter(-B, 0),
		lgbFloatBelow(-B), math.Nextafter(B, 1), 5e-324, -5e-324, 1, -1}
	var xs []float64
	for _, v := range append(ts, 2e-35, -2e-35, 1e-300, -1e-300) {
		xs = append(xs, v, math.Nextafter(v, math.Inf(1)), math.Nextafter(v, math.Inf(-1)))
	}
	moved := 0
	for _, th := range ts {
		t2 := zeroThreshold(th)
		if t2 != th {
			moved++
		}
		for _, x := range xs {
			lx := x
			if math.Abs(x) <= B { // c_api.cpp's dense rows drop |x| <= kZeroThreshold
				lx = 0
			}
			require.Equal(t, lx <= th, x <= t2, "threshold %v, x %v", th, x)
		}
	}
	require.Equal(t, 9, moved) // 0, -0, ±1e-37, ±5e-324, -B and the doubles next to B and -B inside the band
}

// lgbSmall is a two-split model to mutate: a numeric split and a categorical
// one (bitset 0: categories 0 and 3).
const lgbSmall = `tree
version=v4
num_class=1
num_tree_per_iteration=1
label_index=0
max_feature_idx=1
objective=binary sigmoid:1
feature_names=a b
feature_infos=[0:1] 0:3
tree_sizes=1

Tree=0
num_leaves=3
num_cat=1
split_feature=0 1
split_gain=1 1
threshold=0.5 0
decision_type=10 1
left_child=1 -1
right_child=-3 -2
leaf_value=0.25 -0.5 1
leaf_weight=1 1 1
leaf_count=1 1 1
internal_value=0 0
internal_weight=0 0
internal_count=3 2
cat_boundaries=0 1
cat_threshold=9
is_linear=0
shrinkage=1


end of trees

pandas_categorical:null
`

func TestLightGBMSmall(t *testing.T) {
	r, err := Decode([]byte(lgbSmall), "model.txt", "", Options{})
	require.NoError(t, err)
	f := r.Forest
	out := make([]float64, 1)
	for _, c := range []struct{ a, b, want float64 }{
		{0.5, 0, 0.25}, {0.5, 3.9, 0.25}, {0.5, -0.5, 0.25}, {0.5, 1, -0.5}, {0.5, -1, -0.5},
		{0.5, math.NaN(), -0.5}, {0.5, 1 << 32, -0.5}, {0.5000000000000001, 0, 1}, {math.NaN(), 0, 0.25}, {math.NaN(), 1, -0.5}, // NaN: default left (decision_type 10)
	} {
		f.PredictRaw([]float64{c.a, c.b}, out)
		require.Equal(t, c.want, out[0], "a=%v b=%v", c.a, c.b)
	}
}

// TestLightGBMHostile: broken and hostile files get an error naming the
// file (and the tree and node where there is one); nothing panics.
func TestLightGBMHostile(t *testing.T) {
	sub := func(old, new string) string {
		require.Contains(t, lgbSmall, old)
		return strings.Replace(lgbSmall, old, new, 1)
	}
	for _, c := range []struct{ in, want string }{
		{lgbSmall[:len(lgbSmall)/2], `model.txt: the file ends before "end of trees" (after 1 trees)`},
		{sub("num_leaves=3", "num_leaves=1000000000000"), `model.txt:13: tree 0: num_leaves: "1000000000000" is not an integer in [1, 2147483647]`},
		{sub("num_leaves=3", "num_leaves=2000000000"), "model.txt:21: tree 0: leaf_value: num_leaves=2000000000 but the line has 11 bytes"},
		{sub("num_leaves=3", "num_leaves=4"), "model.txt:21: tree 0: leaf_value: 3 values, expected 4"},
		{sub("threshold=0.5 0", "threshold=nan 0"), `model.txt:17: tree 0: threshold: value 0: "nan" is not a finite number`},
		{sub("left_child=1 -1", "left_child=7 -1"), `model.txt:19: tree 0: left_child: value 0: "7" is not an integer in [-3, 1]`},
		{sub("left_child=1 -1", "left_child=0 -1"), "model.txt: tree 0, node 0: node 0 is reached twice (a cycle or a shared child)"},
		{sub("left_child=1 -1", "left_child=1 -3"), "model.txt: tree 0, node 1: leaf 2 is reached twice (a cycle or a shared child)"},
		{sub("decision_type=10 1", "decision_type=10 17"), "model.txt: tree 0, node 1: decision_type 17 has bits this reader does not know"},
		{sub("decision_type=10 1", "decision_type=14 1"), "model.txt: tree 0, node 0: decision_type 14 has bits this reader does not know"},
		{sub("threshold=0.5 0", "threshold=0.5 1"), "model.txt: tree 0, node 1: categorical split with threshold 1: not a bitset index below num_cat=1"},
		{sub("cat_boundaries=0 1", "cat_boundaries=0 5"), "model.txt:27: tree 0: cat_boundaries: must run from 0 to the 1 words of cat_threshold"},
		{sub("split_feature=0 1", "split_feature=0 2"), `model.txt:15: tree 0: split_feature: value 1: "2" is not an integer in [0, 1]`},
		{sub("Tree=0", "Tree=3"), `model.txt:12: "Tree=3": expected Tree=0 (trees are numbered from 0 in order)`},
		{sub("is_linear=0", "is_linear=1"), "model.txt:29: tree 0: a linear tree (is_linear=1): its leaves hold linear models, which the forest format cannot say\nhint: train with linear_tree=false"},
		{sub("objective=binary sigmoid:1", "objective=binary sigmoid:-1"), `model.txt:7: header: objective: sigmoid "-1" is not a positive number`},
		{sub("objective=binary sigmoid:1", "objective=softplus"), "model.txt:7: header: objective: objective \"softplus\" is not one this reader knows"},
		{sub("version=v4", "version=v9"), `model.txt:2: header: version: "v9" is not a version this reader knows`},
		{sub("split_gain=1 1\n", "split_gain=1 1\nthreshold=1 1\n"), `model.txt:18: key "threshold" given twice in the same block`},
		{sub("feature_names=a b", "feature_names=a b c"), "model.txt:8: header: feature_names: more than the 2 values expected"},
		{"\nversion=v4\n", `model.txt:1: "": a LightGBM text model starts with a line "tree"`},
		{sub("Tree=0", "Tree=0\nTree=1"), "model.txt:12: tree 0: \"num_leaves\" is missing"},
		{sub("cat_boundaries=0 1\ncat_threshold=9", "cat_boundaries=0 4000\ncat_threshold="+strings.Repeat("4294967295 ", 4000)), "model.txt:28: tree 0: cat_threshold: the bitsets list more categories than the file has bytes"},
	} {
		_, err := Decode([]byte(c.in), "model.txt", "lightgbm", Options{})
		require.Error(t, err, c.want)
		require.True(t, strings.HasPrefix(err.Error(), c.want), "got  %s\nwant %s", err, c.want)
	}
}

func TestDetectLightGBM(t *testing.T) {
	require.True(t, detectLightGBM([]byte(lgbSmall)))
	require.True(t, detectLightGBM([]byte(strings.ReplaceAll(lgbSmall, "\n", "\r\n"))))
	for _, in := range []string{"", "tree", "tree\n", "tree\nnum_class=1\n", "trees\nversion=v4", `{"sawmill_forest": 1}`} {
		require.False(t, detectLightGBM([]byte(in)), "%q", in)
	}
	f, err := Detect([]byte(lgbSmall), "model.txt")
	require.NoError(t, err)
	require.Equal(t, "lightgbm", f.Name)
}

// FuzzLightGBM: any input either reads into a valid forest that scores
// without panicking, or gives an error that starts with the file's name.
func FuzzLightGBM(f *testing.F) {
	f.Add([]byte(lgbSmall))
	for _, name := range []string{"binary-categorical", "multiclassova", "regression-zero-missing"} {
		data, err := os.ReadFile(filepath.Join("testdata", "lightgbm", name, "model.txt"))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := Decode(data, "model.txt", "lightgbm", Options{})
		if err != nil {
			if !strings.HasPrefix(err.Error(), "model.txt") {
				t.Fatalf("error without the file name: %v", err)
			}
			return
		}
		fo := r.Forest
		if err := fo.Validate("model.txt"); err != nil {
			t.Fatalf("invalid forest returned: %v", err)
		}
		x := make([]float64, len(fo.Features))
		out := make([]float64, fo.NumOutputs())
		for _, v := range []float64{0, math.NaN(), -0.5, 1e-36, 3} {
			for i := range x {
				x[i] = v
			}
			fo.Predict(x, out)
		}
	})
}
