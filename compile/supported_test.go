package compile

import (
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sawmill/forest"
)

// Every version 2 construct the compiler does not implement yet is refused
// by Compile with its name and place, and Lower panics rather than lower it;
// version 2 keys at their defaults, and a category_match without set
// splits, compile as version 1 does.
func TestUnsupportedV2(t *testing.T) {
	stump := func() forest.Tree {
		return forest.Tree{Feature: []int{-1, 0, -1, -1}, Threshold: []float64{0, 0.5, 0, 0},
			Left: []int{-1, 2, -1, -1}, Right: []int{-1, 3, -1, -1}, MissingLeft: make([]bool, 4),
			Value: []float64{0, 0, 1, 2}}
	}
	base := func() *forest.Forest {
		// tree 0: a leaf (node 0) and unreachable slots; tree 1: node 0
		// splits to 1 and 2, node 1 to 3 and 4.
		t1 := forest.Tree{Feature: []int{0, 0, -1, -1, -1}, Threshold: []float64{1, 0.5, 0, 0, 0},
			Left: []int{1, 3, -1, -1, -1}, Right: []int{2, 4, -1, -1, -1}, MissingLeft: make([]bool, 5),
			Value: []float64{0, 0, 1, 2, 3}}
		return &forest.Forest{Task: forest.Regression, Features: []string{"x"}, InputPrecision: forest.Float64,
			Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0},
			Trees: []forest.Tree{stump(), t1}}
	}
	cases := []struct {
		edit func(*forest.Forest)
		want string
	}{
		{func(f *forest.Forest) { f.Trees[1].Categories = [][]int32{nil, {1, 2}, nil, nil, nil} }, "tree 1, node 1: set splits are not supported by the compiler yet"},
		{func(f *forest.Forest) { f.Trees[1].ZeroMissing = []bool{false, true, false, false, false} }, "tree 1, node 1: zero_missing (zeros counted as missing) is not supported by the compiler yet"},
		{func(f *forest.Forest) {
			f.Outputs, f.BaseScore = 2, []float64{0, 0}
			f.Trees[0].HasOutput, f.Trees[0].Output = true, 1
			f.Trees[1].HasOutput = true
		}, `tree 0: a tree with an "output" of its own (per-output trees) is not supported by the compiler yet`},
		{func(f *forest.Forest) { f.Accumulate = forest.Float32 }, `accumulate "float32" is not supported by the compiler yet`},
		{func(f *forest.Forest) { f.Transform = forest.Exp }, `output_transform "exp" is not supported by the compiler yet`},
		{func(f *forest.Forest) { f.Transform = forest.LogisticEach }, `output_transform "logistic_each" is not supported`},
		{func(f *forest.Forest) { f.Transform = forest.Normalize }, `output_transform "normalize" is not supported`},
		{func(f *forest.Forest) { f.TransformScale = 0.5 }, "transform_scale 0.5 is not supported by the compiler yet"},
		{func(f *forest.Forest) {
			f.Outputs, f.BaseScore = 2, []float64{0, 0}
			for i := range f.Trees {
				f.Trees[i].Value = append(f.Trees[i].Value, f.Trees[i].Value...)
			}
		}, "a regression model of 2 outputs is not supported by the compiler yet"},
		{func(f *forest.Forest) { f.HasMissingValue, f.MissingValue = true, -999 }, "missing_value -999 is not supported by the compiler yet"},
	}
	for _, c := range cases {
		f := base()
		c.edit(f)
		require.NoError(t, f.Validate("m.json"), c.want)
		_, _, err := Compile(f, Options{})
		if assert.Error(t, err, c.want) {
			assert.True(t, strings.HasPrefix(err.Error(), c.want), "got %q, want %q", err.Error(), c.want)
			assert.Contains(t, err.Error(), "\nhint: ")
		}
		assert.PanicsWithValue(t, "BUG: compile.Lower: call compile.Unsupported first: "+err.Error(), func() { Lower(f) })
	}
	for _, edit := range []func(*forest.Forest){
		func(f *forest.Forest) {},
		func(f *forest.Forest) {
			f.Accumulate, f.TransformScale, f.Outputs, f.CategoryMatch = forest.Float64, 1, 1, forest.MatchExact
			f.Trees[1].Categories = make([][]int32, 5)
			f.Trees[1].ZeroMissing = []bool{false, false, true, true, true} // at leaves: nothing
		},
	} {
		f := base()
		edit(f)
		require.NoError(t, f.Validate("m.json"))
		_, _, err := Compile(f, Options{})
		assert.NoError(t, err)
	}
}

// The hand-made version 2 files of forest/testdata are all refused, and
// LeafRows still finds rows for them (verify generates rows before it
// compiles).
func TestUnsupportedV2Files(t *testing.T) {
	files, err := filepath.Glob("../forest/testdata/v2-*.json")
	require.NoError(t, err)
	require.NotEmpty(t, files)
	for _, path := range files {
		f, err := forest.ReadFile(path)
		require.NoError(t, err)
		_, _, err = Compile(f, Options{})
		assert.Error(t, err, path)
		rows := LeafRows(f, 0)
		assert.NotEmpty(t, rows, path)
		for _, x := range rows {
			out := make([]float64, f.NumOutputs())
			f.Predict(x, out) // every row is a valid input
		}
		c := Cover(f, rows)
		assert.Positive(t, c.LeavesHit, path)
	}
}
