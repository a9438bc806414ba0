package source

import (
	"bytes"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/parquet-go/parquet-go"
	"github.com/stretchr/testify/require"
)

// sparkFS copies a fixture's model folder into memory, so tests can break
// one file of it.
func sparkFS(t testing.TB, fixture string) fstest.MapFS {
	t.Helper()
	root := filepath.Join("testdata", "spark", fixture, "model")
	m := fstest.MapFS{}
	require.NoError(t, filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		data, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, p)
		m[filepath.ToSlash(rel)] = &fstest.MapFile{Data: data}
		return nil
	}))
	return m
}

func writeParquet[T any](t *testing.T, rows []T) []byte {
	t.Helper()
	var b bytes.Buffer
	require.NoError(t, parquet.Write(&b, rows))
	return b.Bytes()
}

// leaf and split build the nodes of a hand-made regression tree.
func leaf(id int32, p float64) sparkNode {
	return sparkNode{ID: id, Prediction: p, LeftChild: -1, RightChild: -1,
		Split: &sparkSplit{FeatureIndex: -1, NumCategories: -1}}
}

func split(id, l, r, feature int32, t float64) sparkNode {
	return sparkNode{ID: id, LeftChild: l, RightChild: r,
		Split: &sparkSplit{FeatureIndex: feature, LeftCategoriesOrThreshold: []float64{t}, NumCategories: -1}}
}

func catSplit(id, l, r, feature int32, nc int32, left ...float64) sparkNode {
	return sparkNode{ID: id, LeftChild: l, RightChild: r,
		Split: &sparkSplit{FeatureIndex: feature, LeftCategoriesOrThreshold: left, NumCategories: nc}}
}

// TestSparkHandMadeTree reads a tree written by the test's own parquet
// writer, so the reader does not only know Spark's files: a continuous and
// a categorical split of each kind, ids out of preorder.
func TestSparkHandMadeTree(t *testing.T) {
	m := sparkFS(t, "dt_diabetes_cat")
	m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{
		leaf(4, 10), split(0, 1, 2, 0, 0.5), catSplit(1, 3, 4, 1, 2, 1), catSplit(2, 5, 6, 2, 5, 0, 2, 4),
		leaf(3, 20), leaf(5, 30), leaf(6, 40),
	})
	r, err := readSpark(m, "m", Options{})
	require.NoError(t, err)
	f := r.Forest
	x := make([]float64, len(f.Features))
	out := make([]float64, 1)
	for _, c := range []struct {
		f0, f1, f2, want float64
	}{
		{0.5, 1, 0, 20},       // left, category 1 of {1}: left
		{0.5, 0, 0, 10},       // category 0: right
		{0.5, 7, 0, 10},       // unseen: right at a split that keeps the left set
		{0.6, 0, 0, 30},       // right, 0 in {0,2,4} (kept as the complement {1,3})
		{0.6, 0, 1, 40},       // 1: right
		{0.6, 0, 9, 30},       // unseen: left, as Spark sends it
		{0.6, 0, -0.0, 30},    // -0 is category 0
		{0.6, 0, 2.5, 30},     // a fraction is no category: left
		{0.6, 0, f2NaN(), 30}, // NaN: not in {1,3}: left
		{f2NaN(), 0, 1, 40},   // NaN at a continuous split: right
	} {
		x[0], x[1], x[2] = c.f0, c.f1, c.f2
		f.Predict(x, out)
		require.Equal(t, c.want, out[0], "%v", c)
	}
}

func f2NaN() float64 { var z float64; return z / z }

// TestSparkHostile: broken folders get an error naming the folder, file,
// tree and node.
func TestSparkHostile(t *testing.T) {
	good := []sparkNode{split(0, 1, 2, 0, 0.5), leaf(1, 1), leaf(2, 2)}
	for _, c := range []struct {
		name string
		base string
		edit func(m fstest.MapFS)
		want string
	}{
		{"no metadata", "dt_wine", func(m fstest.MapFS) { delete(m, "metadata/part-00000") }, "m: no metadata/part-* file"},
		{"metadata not JSON", "dt_wine", func(m fstest.MapFS) { m["metadata/part-00000"].Data = []byte("{\"class\":") }, "m/metadata/part-00000: not Spark ML metadata"},
		{"no class", "dt_wine", func(m fstest.MapFS) { m["metadata/part-00000"].Data = []byte(`{"numFeatures":3}`) }, `no "class"`},
		{"wrong class", "dt_wine", func(m fstest.MapFS) {
			m["metadata/part-00000"].Data = []byte(`{"class":"org.apache.spark.ml.classification.LogisticRegressionModel","numFeatures":3}`)
		}, "LogisticRegressionModel is not a tree model"},
		{"no numFeatures", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["metadata/part-00000"].Data = []byte(`{"class":"org.apache.spark.ml.regression.DecisionTreeRegressionModel"}`)
		}, "numFeatures is missing"},
		{"no data", "dt_wine", func(m fstest.MapFS) { delete(m, "data/part-00000.parquet") }, "m: no data/part-*.parquet file"},
		{"truncated parquet", "dt_wine", func(m fstest.MapFS) {
			d := m["data/part-00000.parquet"].Data
			m["data/part-00000.parquet"].Data = d[:len(d)/2]
		}, "m/data/part-00000.parquet: "},
		{"garbage parquet", "dt_wine", func(m fstest.MapFS) {
			d := bytes.Clone(m["data/part-00000.parquet"].Data)
			for i := 8; i < len(d)-8; i += 7 {
				d[i] ^= 0x5a
			}
			m["data/part-00000.parquet"].Data = d
		}, "m/data/part-00000.parquet: "},
		{"node id out of range", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{split(0, 1, 2, 0, 0.5), leaf(1, 1), leaf(7, 2)})
		}, "m: tree 0, node 7: id out of range"},
		{"node twice", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{split(0, 1, 2, 0, 0.5), leaf(1, 1), leaf(1, 2)})
		}, "m: tree 0, node 1: listed twice"},
		{"child out of range", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{split(0, 1, 9, 0, 0.5), leaf(1, 1), leaf(2, 2)})
		}, "m: tree 0, node 0: child 1 or 9 out of range"},
		{"cycle", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{split(0, 1, 2, 0, 0.5), split(1, 0, 2, 0, 1), leaf(2, 2)})
		}, "m: tree 0, node "},
		{"feature out of range", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{split(0, 1, 2, 10, 0.5), leaf(1, 1), leaf(2, 2)})
		}, "m: tree 0, node 0: feature 10 out of range (numFeatures is 10)"},
		{"NaN threshold", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{split(0, 1, 2, 1, f2NaN()), leaf(1, 1), leaf(2, 2)})
		}, "m: tree 0, node 0: threshold is NaN"},
		{"fractional category", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{catSplit(0, 1, 2, 1, 4, 1.5), leaf(1, 1), leaf(2, 2)})
		}, "m: tree 0, node 0: category 1.5 is not one of 0..3"},
		{"category listed twice", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{catSplit(0, 1, 2, 1, 4, 1, 1), leaf(1, 1), leaf(2, 2)})
		}, "m: tree 0, node 0: category 1 listed twice"},
		{"half a leaf", "dt_diabetes_cat", func(m fstest.MapFS) {
			n := leaf(1, 1)
			n.RightChild = 2
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkNode{split(0, 1, 2, 0, 0.5), n, leaf(2, 2)})
		}, "m: tree 0, node 1: child -1 or 2 out of range"},
		{"leaf counts of the wrong length", "dt_wine", func(m fstest.MapFS) {
			m["data/part-00000.parquet"].Data = writeParquet(t, good)
		}, "m: tree 0, node 1: 0 class counts in impurityStats, the model has 3 classes"},
		{"ensemble tree out of range", "rf_diabetes_cat", func(m fstest.MapFS) {
			n := leaf(0, 1)
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkEnsembleNode{{TreeID: 8, NodeData: &n}})
		}, "m: data: tree 8 out of range (numTrees is 8)"},
		{"ensemble tree missing", "rf_diabetes_cat", func(m fstest.MapFS) {
			n := leaf(0, 1)
			m["data/part-00000.parquet"].Data = writeParquet(t, []sparkEnsembleNode{{TreeID: 0, NodeData: &n}})
		}, "m: data: tree 1 has no nodes"},
		{"no treesMetadata", "gbt_cancer", func(m fstest.MapFS) { delete(m, "treesMetadata/part-00000.parquet") }, "m: no treesMetadata/part-*.parquet file"},
		{"weight missing", "gbt_cancer", func(m fstest.MapFS) {
			m["treesMetadata/part-00000.parquet"].Data = writeParquet(t, []sparkTreeMeta{{TreeID: 0, Weights: 1}})
		}, "m: treesMetadata: no weight for tree 1"},
		{"forest metadata over a single tree's data", "dt_diabetes_cat", func(m fstest.MapFS) {
			m["metadata/part-00000"].Data = []byte(`{"class":"org.apache.spark.ml.regression.RandomForestRegressionModel","numFeatures":10,"numTrees":1}`)
			m["treesMetadata/part-00000.parquet"] = &fstest.MapFile{Data: writeParquet(t, []sparkTreeMeta{{TreeID: 0, Weights: 1}})}
		}, `m/data/part-00000.parquet: no column "treeID" (the file has id, prediction, impurity, impurityStats, rawCount, gain, leftChild, rightChild, split; want treeID, nodeData)`},
		{"single tree metadata over a forest's data", "rf_diabetes_cat", func(m fstest.MapFS) {
			m["metadata/part-00000"].Data = []byte(`{"class":"org.apache.spark.ml.regression.DecisionTreeRegressionModel","numFeatures":10}`)
		}, `m/data/part-00000.parquet: no column "id" (the file has treeID, nodeData; want id, prediction, leftChild, rightChild, split)`},
		{"pipeline stage missing", "pipeline_rf_wine", func(m fstest.MapFS) {
			for k := range m {
				if strings.HasPrefix(k, "stages/1_") {
					delete(m, k)
				}
			}
		}, "m: stage 1 (RandomForestClassifier_"},
		{"pipeline of another stage", "pipeline_rf_wine", func(m fstest.MapFS) {
			for k, v := range m {
				if strings.HasPrefix(k, "stages/0_") {
					v.Data = bytes.Replace(v.Data, []byte("feature.VectorAssembler"), []byte("feature.StandardScalerModel"), 1)
				}
			}
		}, "stage 0 is a StandardScalerModel"},
	} {
		t.Run(c.name, func(t *testing.T) {
			m := sparkFS(t, c.base)
			c.edit(m)
			_, err := readSpark(m, "m", Options{})
			require.Error(t, err)
			t.Log(err)
			require.Contains(t, err.Error(), c.want)
			require.True(t, strings.HasPrefix(err.Error(), "m"), err.Error())
		})
	}
}

// TestSparkLoadPaths: Load picks the reader for a folder, and says what it
// wants for a folder or file it cannot read.
func TestSparkLoadPaths(t *testing.T) {
	dir := filepath.Join("testdata", "spark", "dt_wine", "model")
	r, err := Load(dir, "spark", Options{})
	require.NoError(t, err)
	require.Equal(t, "spark", r.Format)
	_, err = Load(filepath.Join("testdata", "spark"), "", Options{})
	require.ErrorContains(t, err, "a folder that holds no model this reader knows")
	_, err = Load(dir, "lightgbm", Options{})
	require.ErrorContains(t, err, "is a folder; a lightgbm model is a file")
	_, err = Load(filepath.Join(dir, "metadata", "part-00000"), "spark", Options{})
	require.ErrorContains(t, err, "a Spark ML model is a folder")
}

// TestSparkTreesMetadataTuple: Spark 4.3.0 writes treesMetadata as an
// unnamed tuple (_1 treeID, _2 metadata, _3 weight; measured with
// scripts/spark_live_check.py); the reader takes both forms alike.
func TestSparkTreesMetadataTuple(t *testing.T) {
	type tuple struct {
		T1 int32   `parquet:"_1"`
		T2 string  `parquet:"_2"`
		T3 float64 `parquet:"_3"`
	}
	m := sparkFS(t, "gbt_cancer")
	want, err := readSpark(m, "m", Options{})
	require.NoError(t, err)
	named, err := readSparkParquet[sparkTreeMeta](m, "m", "treesMetadata", "treeID", "weights")
	require.NoError(t, err)
	var rows []tuple
	for i := len(named) - 1; i >= 0; i-- { // out of order, as partitions may be
		rows = append(rows, tuple{named[i].TreeID, "{}", named[i].Weights})
	}
	m["treesMetadata/part-00000.parquet"].Data = writeParquet(t, rows)
	got, err := readSpark(m, "m", Options{})
	require.NoError(t, err)
	require.Equal(t, want.Forest, got.Forest)
	rows[0].T3 = 0.5
	m["treesMetadata/part-00000.parquet"].Data = writeParquet(t, rows)
	got, err = readSpark(m, "m", Options{})
	require.NoError(t, err)
	require.NotEqual(t, want.Forest, got.Forest)
}
