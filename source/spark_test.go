package source

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// sparkFixture is one folder of source/testdata/spark, written by
// scripts/spark_fixtures.py with PySpark 4.0.1 in local mode on Java 17.
type sparkFixture struct {
	name, dir string
	meta      struct {
		Kind                 string `json:"kind"`
		Pipeline             bool   `json:"pipeline"`
		Spark                string `json:"spark"`
		BLAS                 string `json:"blas"`
		CategoricalSplits    int    `json:"categorical_splits"`
		CategoricalRightSets int    `json:"categorical_right_sets"`
	}
	header []string
	rows   [][]float64
	// want: Spark's prediction, then probability_k and rawPrediction_k.
	wantHeader []string
	want       [][]float64
}

func sparkFixtures(t *testing.T, root string) []sparkFixture {
	t.Helper()
	metas, err := filepath.Glob(filepath.Join(root, "*", "meta.json"))
	require.NoError(t, err)
	require.NotEmpty(t, metas, "no models under %s: run scripts/spark_fixtures.py", root)
	var out []sparkFixture
	for _, m := range metas {
		d := filepath.Dir(m)
		fx := sparkFixture{name: filepath.Base(d), dir: d}
		data, err := os.ReadFile(m)
		require.NoError(t, err)
		require.NoError(t, json.Unmarshal(data, &fx.meta))
		fx.header, fx.rows = readFloatCSV(t, filepath.Join(d, "rows.csv"))
		fx.wantHeader, fx.want = readFloatCSV(t, filepath.Join(d, "expected.csv"))
		require.Equal(t, len(fx.rows), len(fx.want), "%s: rows and expected lines", d)
		out = append(out, fx)
	}
	return out
}

// loadSparkFixture imports the fixture's model, naming the features by
// rows.csv's header (a pipeline names them itself, and must name them so).
func loadSparkFixture(t *testing.T, fx sparkFixture) *Result {
	t.Helper()
	o := Options{}
	if !fx.meta.Pipeline {
		o.Features = fx.header
	}
	r, err := Load(filepath.Join(fx.dir, "model"), "", o)
	require.NoError(t, err)
	require.Equal(t, "spark", r.Format)
	require.Equal(t, fx.header, r.Forest.Features)
	return r
}

// TestSparkFixtures holds the reader against PySpark 4.0.1's own outputs on
// held-out rows and rows at and beside every threshold and category edge:
// bit for bit for decision trees and random forests (probability,
// rawPrediction and prediction), and for GBT models within sparkGBTBound
// (Spark's margin goes through a native BLAS ddot; see spark.go).
func TestSparkFixtures(t *testing.T) {
	for _, fx := range sparkFixtures(t, filepath.Join("testdata", "spark")) {
		t.Run(fx.name, func(t *testing.T) { sparkCheck(t, fx) })
	}
}

// TestSparkLive checks the models that scripts/spark_live_check.py trains
// afresh with the installed PySpark and writes under $SAWMILL_SPARK_LIVE,
// exactly as TestSparkFixtures checks the committed ones.
func TestSparkLive(t *testing.T) {
	root := os.Getenv("SAWMILL_SPARK_LIVE")
	if root == "" {
		t.Skip("SAWMILL_SPARK_LIVE is not set: run scripts/spark_live_check.py")
	}
	for _, fx := range sparkFixtures(t, root) {
		t.Run(fx.name, func(t *testing.T) { sparkCheck(t, fx) })
	}
}

// sparkGBTBound bounds how far a GBT margin may be from Spark's, in units of
// 2^-52 times the sum of the magnitudes of the weighted tree outputs, per
// tree: reordering a sum of n terms and fusing its multiply-adds moves it by
// at most about n·2^-53·Σ|terms| (Higham, Accuracy and Stability of
// Numerical Algorithms, 2nd ed., §4.2). The probabilities then follow the
// margin through exp, within 4 ulps of 1 plus that.
const sparkGBTBound = 1.0

// sparkGBTTerms returns the sum of the magnitudes of the weighted tree
// outputs for row x, and the bound on the margin's distance from Spark's.
func sparkGBTTerms(f *forest.Forest, x []float64) (terms, bound float64) {
	for ti := range f.Trees {
		tr := &f.Trees[ti]
		terms += math.Abs(tr.Leaf(f.LeafIndex(tr, x), 1)[0])
	}
	return terms, sparkGBTBound * float64(len(f.Trees)) * terms * 0x1p-52
}

func sparkCheck(t *testing.T, fx sparkFixture) {
	r := loadSparkFixture(t, fx)
	f := r.Forest
	k := f.NumOutputs()
	out, raw := make([]float64, k), make([]float64, k)
	gbt := strings.HasPrefix(fx.meta.Kind, "GBT")
	classifier := strings.HasSuffix(fx.meta.Kind, "Classifier")
	exactRows, worst := 0, 0.0
	for i, x := range fx.rows {
		w := fx.want[i]
		f.Predict(x, out)
		f.PredictRaw(x, raw)
		line := i + 2
		switch {
		case gbt:
			// Spark's rawPrediction is [-m, m]; ours is m.
			m := w[len(w)-1]
			if !classifier {
				m = w[0]
			}
			terms, bound := sparkGBTTerms(f, x)
			d := math.Abs(raw[0] - m)
			require.LessOrEqual(t, d, bound, "line %d: margin %v, Spark %v", line, raw[0], m)
			if d == 0 {
				exactRows++
			}
			worst = max(worst, d/max(terms*0x1p-52, math.SmallestNonzeroFloat64))
			if classifier {
				p1 := w[2]
				require.InDelta(t, p1, out[0], 2*bound+4*0x1p-53, "line %d: probability %v, Spark %v", line, out[0], p1)
				if d == 0 {
					// p1 = 1 - 1/(1+e^(2m)) against the format's logistic:
					// equal within a few ulps of 1.
					require.InDelta(t, p1, out[0], 4*0x1p-53, "line %d", line)
				}
				if math.Abs(m) > bound {
					require.Equal(t, w[0], float64(f.ClassOf(out)), "line %d: class", line)
				}
			}
		case classifier:
			require.Equal(t, float64(f.ClassOf(out)), w[0], "line %d: class", line)
			for j := range k {
				require.Equal(t, math.Float64bits(w[1+j]), math.Float64bits(out[j]),
					"line %d: probability_%d %v, Spark %v", line, j, out[j], w[1+j])
				require.Equal(t, math.Float64bits(w[1+k+j]), math.Float64bits(raw[j]),
					"line %d: rawPrediction_%d %v, Spark %v", line, j, raw[j], w[1+k+j])
			}
			exactRows++
		default:
			require.Equal(t, math.Float64bits(w[0]), math.Float64bits(out[0]),
				"line %d: prediction %v, Spark %v", line, out[0], w[0])
			exactRows++
		}
	}
	t.Logf("%s (%s, BLAS %s): %d of %d rows bit for bit; GBT margins at most %.3g·2^-52·Σ|terms| from Spark's",
		fx.name, fx.meta.Kind, fx.meta.BLAS, exactRows, len(fx.rows), worst)
}

// TestSparkCategoricalSides checks that the fixtures exercise both kinds of
// categorical split (Spark keeping the left categories, and keeping their
// complement, where unseen codes go left), and that the reader wrote the
// second kind with swapped children.
func TestSparkCategoricalSides(t *testing.T) {
	right := 0
	for _, fx := range sparkFixtures(t, filepath.Join("testdata", "spark")) {
		if fx.meta.CategoricalSplits == 0 {
			continue
		}
		r := loadSparkFixture(t, fx)
		sets := 0
		for _, tr := range r.Forest.Trees {
			for i := range tr.Left {
				if tr.IsSetSplit(i) {
					sets++
				}
			}
		}
		require.Equal(t, fx.meta.CategoricalSplits, sets, fx.name)
		right += fx.meta.CategoricalRightSets
		if fx.meta.CategoricalRightSets > 0 {
			require.True(t, strings.Contains(strings.Join(r.Notes, "\n"), "complement"), "%s: %v", fx.name, r.Notes)
		}
		require.Equal(t, forest.MatchExact, r.Forest.CategoryMatch)
	}
	require.Positive(t, right, "no fixture has a categorical split that keeps its complement")
}
