package sqltarget

import (
	"fmt"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// classifier is one stump over x whose two leaves favour class 0 and
// class k-1, combined by softmax when softmax is set.
func classifier(t *testing.T, k int, softmax bool) *compile.Program {
	t.Helper()
	f := &forest.Forest{Task: forest.Classification, InputPrecision: forest.Float64,
		Combine: forest.Average, Transform: forest.NoTransform, Features: []string{"x"}, BaseScore: make([]float64, k)}
	if softmax {
		f.Combine, f.Transform = forest.Sum, forest.Softmax
	}
	for j := 0; j < k; j++ {
		f.Classes = append(f.Classes, fmt.Sprint("c", j))
	}
	v := make([]float64, 3*k)
	v[k], v[3*k-1] = 1, 1
	f.Trees = []forest.Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{0.5, 0, 0},
		Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: make([]bool, 3), Value: v}}
	require.NoError(t, f.Validate("stump"))
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	return p
}

// TestManyClassesLinear holds the statement for k classes to a size in
// proportion to k: the label and the softmax maximum compare groups in
// stages, and the softmax sum is a column, not repeated per output. A
// k(k-1)/2 comparison CASE over 1000 classes is what SQLite refused
// ("Expression tree is too large") before.
func TestManyClassesLinear(t *testing.T) {
	for _, softmax := range []bool{false, true} {
		size := func(k int) int {
			files, err := Emit(classifier(t, k, softmax), Options{Dialect: SQLite, Layout: "table"})
			require.NoError(t, err)
			return len(files[0].Data)
		}
		small, big := size(250), size(1000)
		require.Less(t, float64(big)/float64(small), 5.0, "softmax %v: %d bytes for 250 classes, %d for 1000", softmax, small, big)
	}
}

// TestManyClassesDepth: no expression of the 1000-class statement chains
// more than a few hundred operators, far from SQLite's depth of 1000.
func TestManyClassesDepth(t *testing.T) {
	files, err := Emit(classifier(t, 1000, true), Options{Dialect: SQLite, Layout: "nested"})
	require.NoError(t, err)
	for i, line := range strings.Split(string(files[0].Data), "\n") {
		require.Less(t, strings.Count(line, " + ")+strings.Count(line, " AND "), sumTerms+groupSize,
			"line %d", i+1)
	}
}

// TestBinaryVotes: only an average of two outputs with one-hot leaves sums
// one output and takes the other as the rest.
func TestBinaryVotes(t *testing.T) {
	stump := func(combine forest.Combine, v []float64) *compile.Program {
		f := &forest.Forest{Task: forest.Classification, InputPrecision: forest.Float64,
			Combine: combine, Transform: forest.NoTransform, Features: []string{"x"},
			Classes: []string{"a", "b"}, BaseScore: make([]float64, 2)}
		f.Trees = []forest.Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{0.5, 0, 0},
			Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: make([]bool, 3), Value: v}}
		require.NoError(t, f.Validate("stump"))
		p, _, err := compile.Compile(f, compile.Options{})
		require.NoError(t, err)
		return p
	}
	for _, c := range []struct {
		combine forest.Combine
		v       []float64
		want    bool
	}{
		{forest.Average, []float64{0, 0, 1, 0, 0, 1}, true},
		{forest.Vote, []float64{0, 0, 0.2, 0.8, 0.5, 0.5}, true}, // vote leaves become one-hot
		{forest.Average, []float64{0, 0, 0.2, 0.8, 0, 1}, false},
		{forest.Sum, []float64{0, 0, 1, 0, 0, 1}, false}, // sums start from the base score
	} {
		p := stump(c.combine, c.v)
		require.Equal(t, c.want, binaryVotes(p), "%s %v", c.combine, c.v)
		files, err := Emit(p, Options{Dialect: SQLite})
		require.NoError(t, err)
		require.Equal(t, c.want, strings.Contains(string(files[0].Data), " - z1) / "), "%s %v", c.combine, c.v)
	}
}
