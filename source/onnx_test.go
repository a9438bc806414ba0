package source

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// onnxTransformULPs bounds the distance, in float32 steps, between sawmill's
// LOGISTIC and SOFTMAX (format 2's float32 formulas) and ONNX Runtime's,
// which are its own vectorised approximations (MLAS): measured on the
// fixtures, see the test's log. The scores before the transform are held bit
// for bit.
const onnxTransformULPs = 4

// onnxFixture is one folder of source/testdata/onnx, written by
// scripts/onnx_fixtures.py with onnxruntime 1.31.1.
type onnxFixture struct {
	name  string
	dir   string
	model []byte
	meta  struct {
		Error  string `json:"error"`
		Source string `json:"source"`
	}
}

func onnxFixtures(t *testing.T, root string) []onnxFixture {
	t.Helper()
	models, err := filepath.Glob(filepath.Join(root, "*", "model.onnx"))
	require.NoError(t, err)
	require.NotEmpty(t, models, "no models under %s: run scripts/onnx_fixtures.py", root)
	var out []onnxFixture
	for _, m := range models {
		d := filepath.Dir(m)
		fx := onnxFixture{name: filepath.Base(d), dir: d}
		fx.model, err = os.ReadFile(m)
		require.NoError(t, err)
		meta, err := os.ReadFile(filepath.Join(d, "meta.json"))
		require.NoError(t, err)
		require.NoError(t, json.Unmarshal(meta, &fx.meta))
		out = append(out, fx)
	}
	return out
}

// onnxSteps is the distance between a and b in float32 steps at b, or at
// 0.5 where b is smaller: the bound on a transformed output (a probability)
// is absolute below 0.5 (ONNX Runtime's approximations are), relative above.
func onnxSteps(a, b float64) float64 {
	if a == b {
		return 0
	}
	fb := float32(max(math.Abs(b), 0.5))
	return math.Abs(a-b) / float64(math.Nextafter32(fb, float32(math.Inf(1)))-fb)
}

// column returns the values of the columns of head named prefix0, prefix1, ...
func columns(head []string, row []float64, prefix string) []float64 {
	var out []float64
	for j, h := range head {
		if strings.HasPrefix(h, prefix) {
			out = append(out, row[j])
		}
	}
	return out
}

// TestONNXFixtures holds the reader against ONNX Runtime 1.31.1 on one
// thread: the scores before the transform bit for bit on every row (held-out
// rows, rows at and beside every threshold as float32, NaN), the transformed
// outputs within onnxTransformULPs (bit for bit where there is no transform),
// and the predicted label. Where a model came from scikit-learn it also
// compares scikit-learn's own float64 outputs: the ONNX model (float32
// thresholds, weights and sums) may differ from them, which is the
// converter's doing and not sawmill's. On the committed fixtures skl2onnx
// 1.20.0's thresholds send every probe row to the same leaf as
// scikit-learn 1.9.1, and the outputs differ by float32 rounding only (the
// log gives the largest difference).
func TestONNXFixtures(t *testing.T) {
	worst := map[string]float64{}
	for _, fx := range onnxFixtures(t, filepath.Join("testdata", "onnx")) {
		t.Run(fx.name, func(t *testing.T) { worst[fx.name] = onnxCheck(t, fx) })
	}
	t.Logf("largest distance of a transformed output from ONNX Runtime's, in float32 steps: %v", worst)
}

// TestONNXLive checks the models that scripts/onnx_live_check.py converts
// afresh with the installed converters and writes under $SAWMILL_ONNX_LIVE,
// exactly as TestONNXFixtures checks the committed ones.
func TestONNXLive(t *testing.T) {
	root := os.Getenv("SAWMILL_ONNX_LIVE")
	if root == "" {
		t.Skip("SAWMILL_ONNX_LIVE is not set: run scripts/onnx_live_check.py")
	}
	for _, fx := range onnxFixtures(t, root) {
		t.Run(fx.name, func(t *testing.T) { onnxCheck(t, fx) })
	}
}

func onnxCheck(t *testing.T, fx onnxFixture) float64 {
	require.True(t, detectONNX(fx.model), "Detect")
	r, err := Decode(fx.model, "model.onnx", "", Options{})
	if fx.meta.Error != "" {
		require.Error(t, err)
		require.Contains(t, err.Error(), fx.meta.Error)
		require.True(t, strings.HasPrefix(err.Error(), "model.onnx: "), err.Error())
		return 0
	}
	require.NoError(t, err)
	require.Equal(t, "onnx", r.Format)
	f := r.Forest
	_, rows := readFloatCSV(t, filepath.Join(fx.dir, "rows.csv"))
	head, want := readFloatCSV(t, filepath.Join(fx.dir, "expected.csv"))
	require.Len(t, want, len(rows))
	k := f.NumOutputs()
	raw := make([]float64, k)
	out := make([]float64, k)
	// Through compile: a program must score every row like the
	// interpreter, or compile must refuse a format 2 construct it does not
	// implement with a message that says so.
	p, _, cerr := compile.Compile(f, compile.Options{})
	switch {
	case cerr == nil:
	case len(f.V2Constructs()) > 0 && strings.Contains(cerr.Error(), "not supported"):
		t.Logf("%s: compile refuses it: %v", fx.name, cerr)
		p = nil
	default:
		require.NoError(t, cerr)
	}
	compiled := make([]float64, k)
	worst := 0.0
	labelOff := 0
	positiveLogistic := false
	for _, n := range r.Notes {
		positiveLogistic = positiveLogistic || strings.HasPrefix(n, "warning: no weight is negative")
	}
	for i, x := range rows {
		wraw := columns(head, want[i], "raw_")
		wout := columns(head, want[i], "out_")
		f.PredictRaw(x, raw)
		copy(out, raw)
		f.Finish(out)
		if p != nil {
			compile.Eval(p, x, compiled)
			for j := range k {
				require.Equal(t, math.Float64bits(out[j]), math.Float64bits(compiled[j]), "row %d, output %d: compiled %v, interpreter %v", i+1, j, compiled[j], out[j])
			}
		}
		// The binary case: ONNX Runtime's raw outputs are [-s, s]; with a
		// logistic sawmill has one output, s.
		if k == 1 && len(wraw) == 2 {
			require.Equal(t, math.Float64bits(wraw[1]), math.Float64bits(raw[0]), "row %d: raw score %v, ONNX Runtime %v", i+1, raw[0], wraw[1])
		} else {
			require.Len(t, wraw, k)
			for j := range raw {
				require.Equal(t, math.Float64bits(wraw[j]), math.Float64bits(raw[j]), "row %d, output %d: raw score %v, ONNX Runtime %v", i+1, j, raw[j], wraw[j])
			}
		}
		if f.Transform == forest.NoTransform {
			for j := range out {
				require.Equal(t, math.Float64bits(wout[j]), math.Float64bits(out[j]), "row %d, output %d: %v, ONNX Runtime %v", i+1, j, out[j], wout[j])
			}
		} else {
			got := out
			if k == 1 && len(wout) == 2 {
				// [1-p, p]: the first from sawmill's p, in float32.
				got = []float64{float64(1 - float32(out[0])), out[0]}
			}
			require.Len(t, wout, len(got))
			for j := range got {
				d := onnxSteps(got[j], wout[j])
				worst = max(worst, d)
				require.LessOrEqual(t, d, float64(onnxTransformULPs), "row %d, output %d: %v, ONNX Runtime %v", i+1, j, got[j], wout[j])
			}
		}
		if f.IsClassifier() {
			lab := columns(head, want[i], "label")
			require.Len(t, lab, 1)
			if float64(f.ClassOf(out)) != lab[0] {
				// Only where the reader warns: a binary case with no
				// negative weight labels by s > 0.5 whatever the transform.
				require.True(t, positiveLogistic, "row %d: class %d, ONNX Runtime's label %v", i+1, f.ClassOf(out), lab[0])
				require.True(t, raw[0] > 0 && raw[0] <= 0.5, "row %d: score %v", i+1, raw[0])
				labelOff++
			}
		}
	}
	if positiveLogistic {
		t.Logf("%s: ONNX Runtime's label differs from its probabilities' argmax on %d rows (score in (0, 0.5])", fx.name, labelOff)
	}
	onnxCompareSklearn(t, fx, f, rows, head, want)
	onnxCompareReference(t, fx, f, rows)
	return worst
}

// onnxCompareReference holds the reader to onnx.reference (the ONNX
// package's Python evaluator), where it ran the model: its outputs are the
// operator as the standard's authors read it, computed with numpy in their
// own order and precision, so they are held to 1e-5 relative on the
// converters' models, and the log says how many agree bit for bit.
func onnxCompareReference(t *testing.T, fx onnxFixture, f *forest.Forest, rows [][]float64) {
	path := filepath.Join(fx.dir, "reference.csv")
	if _, err := os.Stat(path); err != nil {
		return
	}
	_, ref := readFloatCSV(t, path)
	require.Len(t, ref, len(rows))
	out := make([]float64, f.NumOutputs())
	same, all, off := 0, 0, 0
	for i, x := range rows {
		f.Predict(x, out)
		got := out
		if len(out) == 1 && len(ref[i]) == 2 {
			got = []float64{1 - out[0], out[0]}
		}
		require.Len(t, ref[i], len(got))
		for j := range got {
			all++
			if float32(got[j]) == float32(ref[i][j]) {
				same++
			}
			if math.Abs(ref[i][j]-got[j]) > 1e-5*max(1, math.Abs(ref[i][j])) {
				off++
				// On the converters' models the two agree; on the hand-built
				// ones (NaN routing, the binary case, strict modes)
				// onnx.reference 1.23.2 reads the operator otherwise than
				// ONNX Runtime does, and sawmill follows ONNX Runtime.
				require.Equal(t, "onnx.helper", fx.meta.Source, "row %d, output %d: %v, onnx.reference %v", i+1, j, got[j], ref[i][j])
			}
		}
	}
	t.Logf("%s: onnx.reference agrees bit for bit (as float32) on %d of %d outputs, differs by more than 1e-5 on %d", fx.name, same, all, off)
}

// onnxCompareSklearn counts the rows where scikit-learn's own prediction
// differs from the ONNX model's (ONNX Runtime's outputs): the class for a
// classifier, more than 1e-4 relative for a regressor. The held-out rows
// (the first onnxHeldOut) must agree; rows at and beside a threshold may
// not, since the ONNX model compares float32 inputs with float32 thresholds
// where scikit-learn compares float32 inputs with float64 thresholds: such
// disagreements are the converter's, and the log counts them.
func onnxCompareSklearn(t *testing.T, fx onnxFixture, f *forest.Forest, rows [][]float64, head []string, want [][]float64) {
	path := filepath.Join(fx.dir, "sklearn.csv")
	if _, err := os.Stat(path); err != nil {
		return
	}
	_, skl := readFloatCSV(t, path)
	require.Len(t, skl, len(rows))
	off, compared, worst := 0, 0, 0.0
	for i := range rows {
		if math.IsNaN(skl[i][0]) {
			continue // a row with a NaN: scikit-learn was not asked
		}
		compared++
		for j, v := range columns(head, want[i], "out_") {
			if j < len(skl[i]) {
				worst = max(worst, math.Abs(v-skl[i][j]))
			}
		}
		differs := false
		if f.IsClassifier() {
			differs = float64(forest.Argmax(skl[i])) != columns(head, want[i], "label")[0]
		} else {
			for j, v := range columns(head, want[i], "out_") {
				differs = differs || math.Abs(v-skl[i][j]) > 1e-4*max(1, math.Abs(skl[i][j]))
			}
		}
		if differs {
			off++
			require.GreaterOrEqual(t, i, onnxHeldOut, "row %d: a held-out row on which the ONNX model and scikit-learn disagree", i+1)
		}
	}
	t.Logf("%s: the ONNX model disagrees with scikit-learn on %d of %d rows (held-out rows never); its outputs differ from scikit-learn's float64 ones by up to %.3g", fx.name, off, compared, worst)
}

// onnxHeldOut is the number of held-out rows at the top of every fixture's
// rows.csv (scripts/onnx_fixtures.py).
const onnxHeldOut = 40
