package forest_test

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// The scikit-learn reference fixtures: random forests trained by
// scikit-learn 1.2.1 (Debian python3-sklearn) RandomForestClassifier on
//
//   - sklearn-wine: the UCI Wine dataset (Forina et al.; UCI Machine Learning
//     Repository), sklearn.datasets.load_wine;
//   - sklearn-breast-cancer: Breast Cancer Wisconsin (Diagnostic) (Wolberg,
//     Street, Mangasarian 1995; UCI Machine Learning Repository),
//     sklearn.datasets.load_breast_cancer;
//
// written in the forest format with the probabilities sklearn's
// predict_proba and predict gave for every row, by
// scripts/sklearn_fixtures.py. The tests read only the committed files.
var sklearnCases = []string{"sklearn-wine", "sklearn-breast-cancer"}

const sklearnTolerance = 1e-12

func sklearnDir(name string) string { return filepath.Join("..", "golden", "testdata", name) }

// readTable reads a CSV file with a header into maps from column name to cell,
// with the file's line number of each record.
func readTable(t *testing.T, path string) ([]map[string]string, []int) {
	t.Helper()
	fh, err := os.Open(path)
	require.NoError(t, err, "the fixture is missing\nhint: run scripts/sklearn_fixtures.py with a Python that has scikit-learn")
	defer fh.Close()
	cr := csv.NewReader(fh)
	all, err := cr.ReadAll()
	require.NoError(t, err, path)
	require.NotEmpty(t, all, "%s: empty file", path)
	header := all[0]
	recs := make([]map[string]string, 0, len(all)-1)
	lines := make([]int, 0, len(all)-1)
	for i, rec := range all[1:] {
		m := make(map[string]string, len(header))
		for j, h := range header {
			m[h] = rec[j]
		}
		recs = append(recs, m)
		lines = append(lines, i+2)
	}
	return recs, lines
}

func cellFloat(t *testing.T, path string, line int, rec map[string]string, col string) float64 {
	t.Helper()
	s, ok := rec[col]
	require.True(t, ok, "%s:%d: no column %q", path, line, col)
	v, err := strconv.ParseFloat(s, 64)
	require.NoError(t, err, "%s:%d: column %q", path, line, col)
	return v
}

func cellInt(t *testing.T, path string, line int, rec map[string]string, col string) int {
	t.Helper()
	s, ok := rec[col]
	require.True(t, ok, "%s:%d: no column %q", path, line, col)
	v, err := strconv.Atoi(s)
	require.NoError(t, err, "%s:%d: column %q", path, line, col)
	return v
}

type sklearnCase struct {
	model *forest.Forest
	rows  *forest.Rows
	index map[string]int // row id -> row number in rows
}

func loadSklearnCase(t *testing.T, name string) sklearnCase {
	t.Helper()
	dir := sklearnDir(name)
	_, err := os.Stat(dir)
	require.NoError(t, err, "fixture folder %s is missing\nhint: run scripts/sklearn_fixtures.py with a Python that has scikit-learn", dir)
	m, err := forest.ReadFile(filepath.Join(dir, "model.json"))
	require.NoError(t, err)
	require.Equal(t, forest.Float32, m.InputPrecision, "sklearn compares float32 inputs")
	rows, err := forest.ReadRowsFile(filepath.Join(dir, "rows.csv"), m.Features, forest.RowOptions{Keep: []string{"id"}})
	require.NoError(t, err)
	index := make(map[string]int, rows.Len())
	for i := range rows.Len() {
		id := rows.Extra[i][0]
		_, dup := index[id]
		require.False(t, dup, "%s/rows.csv:%d: id %q appears twice", dir, rows.Line[i], id)
		index[id] = i
	}
	return sklearnCase{m, rows, index}
}

// Every row, dataset rows and threshold probes alike, scores within 1e-12 of
// sklearn's predict_proba and gets sklearn's predicted class.
func TestSklearnPredictProba(t *testing.T) {
	for _, name := range sklearnCases {
		t.Run(name, func(t *testing.T) {
			c := loadSklearnCase(t, name)
			path := filepath.Join(sklearnDir(name), "sklearn.csv")
			want, lines := readTable(t, path)
			require.Equal(t, c.rows.Len(), len(want), "%s: one line per row of rows.csv", path)
			out := make([]float64, c.model.NumOutputs())
			maxDiff, exact, bad := 0.0, 0, 0
			for i, rec := range want {
				line := lines[i]
				require.Equal(t, c.rows.Extra[i][0], rec["id"], "%s:%d: ids out of order with rows.csv", path, line)
				c.model.Predict(c.rows.Row(i), out)
				same := true
				for j, cl := range c.model.Classes {
					p := cellFloat(t, path, line, rec, cl)
					d := math.Abs(out[j] - p)
					maxDiff = math.Max(maxDiff, d)
					if d > sklearnTolerance && bad < 10 {
						t.Errorf("%s:%d: row %s, class %q: interpreter %v, sklearn %v (diff %g)", path, line, rec["id"], cl, out[j], p, d)
					}
					if d > sklearnTolerance {
						bad++
					}
					same = same && out[j] == p
				}
				if same {
					exact++
				}
				if got := c.model.Classes[c.model.ClassOf(out)]; got != rec["sklearn_class"] {
					t.Errorf("%s:%d: row %s: interpreter predicts %q, sklearn %q (outputs %v)", path, line, rec["id"], got, rec["sklearn_class"], out)
				}
			}
			t.Logf("%s: %d rows, max |interpreter - sklearn| = %g, %d rows bit-identical", name, len(want), maxDiff, exact)
		})
	}
}

// sideAt says how the path of row x through tree ti passes node n, by
// walking up from the leaf the interpreter chose: "left", "right" or
// "unreached".
func sideAt(m *forest.Forest, ti, n int, x []float64) string {
	tr := &m.Trees[ti]
	parent := make([]int, tr.NumNodes())
	for i := range parent {
		parent[i] = -1
	}
	for i := range tr.NumNodes() {
		if !tr.IsLeaf(i) {
			parent[tr.Left[i]] = i
			parent[tr.Right[i]] = i
		}
	}
	for child := m.LeafIndex(tr, x); child != 0; child = parent[child] {
		if p := parent[child]; p == n {
			if tr.Left[n] == child {
				return "left"
			}
			return "right"
		}
	}
	return "unreached"
}

// Each probe row puts one split's feature at, or a float32 or float64 step
// from, its threshold; at that node the interpreter takes the branch sklearn's
// tree took (recorded from DecisionTreeClassifier.decision_path). A value at
// float32(threshold) goes left exactly when the rounding did not carry it
// above the threshold: the counts per side are logged.
func TestSklearnThresholdProbes(t *testing.T) {
	for _, name := range sklearnCases {
		t.Run(name, func(t *testing.T) {
			c := loadSklearnCase(t, name)
			path := filepath.Join(sklearnDir(name), "probes.csv")
			probes, lines := readTable(t, path)
			require.GreaterOrEqual(t, len(probes), 300, "%s: too few probes", path)
			sides := map[string]map[string]int{}
			for i, rec := range probes {
				line := lines[i]
				row, ok := c.index[rec["id"]]
				require.True(t, ok, "%s:%d: probe %q is not in rows.csv", path, line, rec["id"])
				ti := cellInt(t, path, line, rec, "tree")
				n := cellInt(t, path, line, rec, "node")
				f := cellInt(t, path, line, rec, "feature")
				require.Less(t, ti, len(c.model.Trees), "%s:%d", path, line)
				tr := &c.model.Trees[ti]
				require.Less(t, n, tr.NumNodes(), "%s:%d", path, line)
				require.False(t, tr.IsLeaf(n), "%s:%d: node %d is a leaf", path, line, n)
				require.Equal(t, f, tr.Feature[n], "%s:%d: feature", path, line)
				thr := cellFloat(t, path, line, rec, "threshold")
				require.Equal(t, thr, tr.Threshold[n], "%s:%d: threshold", path, line)
				x := c.rows.Row(row)
				v := cellFloat(t, path, line, rec, "value")
				require.Equal(t, v, x[f], "%s:%d: the row's value", path, line)

				// The probe is what its kind says.
				t32 := forest.Round32(thr)
				kind := rec["kind"]
				switch kind {
				case "thr":
					require.Equal(t, thr, v, "%s:%d", path, line)
				case "f32":
					require.Equal(t, t32, v, "%s:%d", path, line)
				case "f32up":
					require.Equal(t, float64(math.Nextafter32(float32(t32), float32(math.Inf(1)))), v, "%s:%d", path, line)
				case "f32down":
					require.Equal(t, float64(math.Nextafter32(float32(t32), float32(math.Inf(-1)))), v, "%s:%d", path, line)
				case "f64up":
					require.Equal(t, math.Nextafter(thr, math.Inf(1)), v, "%s:%d", path, line)
				case "f64down":
					require.Equal(t, math.Nextafter(thr, math.Inf(-1)), v, "%s:%d", path, line)
				default:
					t.Fatalf("%s:%d: unknown probe kind %q", path, line, kind)
				}

				got := sideAt(c.model, ti, n, x)
				if want := rec["sklearn_side"]; got != want {
					t.Errorf("%s:%d: probe %s (tree %d, node %d, feature %d, threshold %v, value %v, float32 %v): interpreter goes %s, sklearn %s",
						path, line, rec["id"], ti, n, f, thr, v, forest.Round32(v), got, want)
				}
				if sides[kind] == nil {
					sides[kind] = map[string]int{}
				}
				sides[kind][got]++
			}
			for _, kind := range []string{"thr", "f32", "f32down", "f32up", "f64down", "f64up"} {
				s := sides[kind]
				t.Logf("%s: probes %-7s left %3d, right %3d, unreached %d", name, kind, s["left"], s["right"], s["unreached"])
			}
			// Values one float32 step below and above float32(threshold) must
			// fall on opposite sides; both sides must occur at float32(threshold)
			// for the probes to mean anything.
			require.Zero(t, sides["f32down"]["right"], "a float32 step below the rounded threshold went right")
			require.Zero(t, sides["f32up"]["left"], "a float32 step above the rounded threshold went left")
			require.NotZero(t, sides["f32"]["left"], "no probe at float32(threshold) went left")
			require.NotZero(t, sides["f32"]["right"], "no probe at float32(threshold) went right")
		})
	}
}

// The fixture folders hold what other tests read by name.
func TestSklearnFixtureFiles(t *testing.T) {
	for _, name := range sklearnCases {
		for _, f := range []string{"model.json", "rows.csv", "sklearn.csv", "probes.csv", "data.csv", "oob.json"} {
			p := filepath.Join(sklearnDir(name), f)
			st, err := os.Stat(p)
			if err != nil {
				t.Errorf("%v\nhint: run scripts/sklearn_fixtures.py with a Python that has scikit-learn", err)
				continue
			}
			if st.Size() > 400<<10 {
				t.Errorf("%s: %d bytes, more than the 400 KiB a fixture may take", p, st.Size())
			}
		}
	}
}
