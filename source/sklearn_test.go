package source

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// sklearnTolerance bounds |sawmill − scikit-learn| on transformed outputs:
// raw scores must agree bit for bit, but predict_proba and predict apply
// scikit-learn's own exp, logistic and softmax (numpy and scipy's formulas,
// which may round differently from the interpreter's by an ulp or two).
const sklearnTolerance = 1e-12

// TestSklearnFixtures holds the models python/sawmill_export.py wrote from
// scikit-learn 1.2.1 (Debian's python3-sklearn; folders s12-*) and 1.9.1
// (python/requirements.txt; folders s19-*) against scikit-learn's own
// outputs, recorded by `scripts/sklearn_live_check.py --fixtures`: on
// held-out rows and on rows at and beside every threshold and category edge,
// with NaN and ±inf where scikit-learn accepts them, the joined score equals
// scikit-learn's raw score (_raw_predict, or predict_proba / predict for
// the forests) bit for bit, the outputs equal predict_proba / predict
// within sklearnTolerance, and the predicted class is scikit-learn's.
func TestSklearnFixtures(t *testing.T) {
	models, err := filepath.Glob(filepath.Join("testdata", "sklearn", "*", "model.json"))
	require.NoError(t, err)
	versions := map[string]int{}
	for _, m := range models {
		dir := filepath.Dir(m)
		name := filepath.Base(dir)
		versions[strings.SplitN(name, "-", 2)[0]]++
		t.Run(name, func(t *testing.T) { sklearnCheck(t, dir) })
	}
	require.GreaterOrEqual(t, versions["s12"], 10, "fixtures from scikit-learn 1.2.1: /usr/bin/python3 scripts/sklearn_live_check.py --fixtures source/testdata/sklearn")
	require.GreaterOrEqual(t, versions["s19"], 10, "fixtures from scikit-learn 1.9.1: .venv/bin/python scripts/sklearn_live_check.py --fixtures source/testdata/sklearn")
}

func sklearnCheck(t *testing.T, dir string) {
	f, err := forest.ReadFile(filepath.Join(dir, "model.json"))
	require.NoError(t, err)
	rows, err := forest.ReadRowsFile(filepath.Join(dir, "rows.csv"), f.Features, forest.RowOptions{})
	require.NoError(t, err)
	head, want := readFloatCSV(t, filepath.Join(dir, "expected.csv"))
	require.Equal(t, rows.Len(), len(want), "expected.csv has a line per row")
	k := f.NumOutputs()
	raw, out := make([]float64, k), make([]float64, k)
	require.Equal(t, "raw_0", head[0])
	require.Equal(t, "out_0", head[k])
	hasClass := head[len(head)-1] == "class_index"
	require.Equal(t, f.IsClassifier(), hasClass)
	worst, exact := 0.0, 0
	for i := 0; i < rows.Len(); i++ {
		x := rows.Row(i)
		f.PredictRaw(x, raw)
		f.Predict(x, out)
		for j := 0; j < k; j++ {
			require.Equal(t, want[i][j], raw[j], "rows.csv:%d: raw score %d (scikit-learn's, bit for bit)", i+2, j)
			d := out[j] - want[i][k+j]
			if d < 0 {
				d = -d
			}
			worst = max(worst, d)
			require.LessOrEqual(t, d, sklearnTolerance, "rows.csv:%d: output %d is %v, scikit-learn's %v", i+2, j, out[j], want[i][k+j])
		}
		if hasClass {
			require.Equal(t, int(want[i][2*k]), f.ClassOf(out), "rows.csv:%d: predicted class", i+2)
		}
		if same(out, want[i][k:2*k]) {
			exact++
		}
	}
	t.Logf("%d rows: raw scores bit for bit; outputs bit for bit on %d, largest |diff| %.3g", rows.Len(), exact, worst)
}

func same(a, b []float64) bool {
	for j := range a {
		if a[j] != b[j] {
			return false
		}
	}
	return true
}

// The fixture folders hold what the exporter wrote, not a hand edit: each
// names python/sawmill_export.py and its scikit-learn version.
func TestSklearnFixturesProvenance(t *testing.T) {
	models, err := filepath.Glob(filepath.Join("testdata", "sklearn", "*", "model.json"))
	require.NoError(t, err)
	require.NotEmpty(t, models)
	for _, m := range models {
		b, err := os.ReadFile(m)
		require.NoError(t, err)
		v := map[string]string{"s12": "scikit-learn 1.2.1 ", "s19": "scikit-learn 1.9.1 "}[strings.SplitN(filepath.Base(filepath.Dir(m)), "-", 2)[0]]
		require.NotEmpty(t, v, "%s: folder names start s12- or s19-", m)
		require.Contains(t, string(b), `"trainer": "`+v, m)
		require.Contains(t, string(b), `"exporter": "python/sawmill_export.py"`, m)
	}
}
