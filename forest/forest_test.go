package forest

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// The example document of the format page reads, scores as its "Meaning"
// says, and writes back to a document that reads to the same forest.
func TestReadExample(t *testing.T) {
	f, err := ReadFile("testdata/pump.json")
	require.NoError(t, err)
	assert.Equal(t, 3, f.NumOutputs())
	out := make([]float64, 3)
	f.Predict([]float64{1, 61.5, 3}, out) // exactly at the threshold: left
	assert.Equal(t, []float64{0.9, 0.1, 0}, out)
	f.Predict([]float64{1, math.Nextafter(61.5, 100), 3}, out)
	assert.Equal(t, []float64{0.2, 0.3, 0.5}, out)
	f.Predict([]float64{1, math.NaN(), 3}, out) // missing goes right
	assert.Equal(t, []float64{0.2, 0.3, 0.5}, out)
	assert.Equal(t, 2, f.ClassOf(out))

	var buf bytes.Buffer
	require.NoError(t, f.Encode(&buf))
	g, err := Read(bytes.NewReader(buf.Bytes()), "again.json")
	require.NoError(t, err)
	assert.Equal(t, f, g)
	var buf2 bytes.Buffer
	require.NoError(t, g.Encode(&buf2))
	assert.Equal(t, buf.String(), buf2.String(), "encoding is deterministic")
}

func mustDecode(t *testing.T, doc string) (*Forest, error) {
	t.Helper()
	return Decode([]byte(doc), "m.json", ReadOptions{})
}

const head = `"sawmill_forest":1,"task":"regression","features":["a","b"],`

// Every rejection the format page lists, each naming its place.
func TestRejections(t *testing.T) {
	cases := []struct{ doc, want string }{
		{`{"sawmill_forest":3,"task":"regression","features":["a"],"trees":[]}`, "m.json: sawmill_forest version 3 is not supported"},
		{`{"task":"regression"}`, "missing \"sawmill_forest\""},
		{`{"sawmill_forest":1,"task":"ranking","features":["a"],"trees":[{"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}]}`, `unknown task "ranking"`},
		{`{` + head + `"combine":"max","trees":[{"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}]}`, `unknown combine "max"`},
		{`{` + head + `"output_transform":"tanh","trees":[{"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}]}`, `unknown output_transform "tanh"`},
		{`{` + head + `"trees":[{"feature":[0],"threshold":[0,0],"left":[1,-1],"right":[2,-1],"value":[[0],[1]]}]}`, "tree 0: \"feature\" has 1 entries but \"left\" has 2"},
		{`{` + head + `"trees":[{"feature":[0,-1,-1],"threshold":[0,0,0],"left":[1,-1,-1],"right":[3,-1,-1],"value":[[0],[1],[2]]}]}`, "m.json: tree 0, node 0: child id 3 is out of range"},
		{`{` + head + `"trees":[{"feature":[0,-1],"threshold":[0,0],"left":[1,-1],"right":[1,-1],"value":[[0],[1]]}]}`, "tree 0, node 0: child 1 is reached twice"},
		{`{` + head + `"trees":[{"feature":[0,0,-1],"threshold":[0,0,0],"left":[1,0,-1],"right":[2,2,-1],"value":[[0],[0],[2]]}]}`, "reached twice"},
		{`{` + head + `"trees":[{"feature":[5,-1,-1],"threshold":[0,0,0],"left":[1,-1,-1],"right":[2,-1,-1],"value":[[0],[1],[2]]}]}`, "tree 0, node 0: splits on feature 5"},
		{`{` + head + `"trees":[{"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1,2]]}]}`, "tree 0, node 0: value has 2 entries, the model has 1 outputs"},
		{`{"sawmill_forest":1,"task":"regression","features":["a","a"],"trees":[{"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}]}`, `feature 1 has the same name as feature 0: "a"`},
		{`{"sawmill_forest":1,"task":"classification","classes":["x"],"features":["a"],"trees":[{"feature":[-1],"threshold":[0],"left":[-1],"right":[-1],"value":[[1]]}]}`, "at least two classes, found 1"},
		{`{` + head + `"trees":[{"feature":[0,-1,-1],"threshold":[0,0,0],"left":[1,-1,-1],"right":[2,-1,-1],"value":[[0],[1],[1e999]]}]}`, "m.json"},
	}
	for _, c := range cases {
		_, err := mustDecode(t, c.doc)
		if assert.Error(t, err, c.doc) {
			assert.Contains(t, err.Error(), c.want, c.doc)
			assert.True(t, strings.HasPrefix(err.Error(), "m.json"), err.Error())
		}
	}
}

// A value vector of the wrong length at an unreachable node is not read and
// so not an error; at a reachable leaf it is.
func TestUnreachableIgnored(t *testing.T) {
	_, err := mustDecode(t, `{`+head+`"trees":[{"feature":[-1,7],"threshold":[0,0],"left":[-1,-1],"right":[-1,-1],"value":[[1],[]]}]}`)
	assert.NoError(t, err)
}

// A chain one million nodes deep is checked without recursion.
func TestDeepChain(t *testing.T) {
	const n = 1_000_000
	tr := Tree{Feature: make([]int, 2*n+1), Threshold: make([]float64, 2*n+1), Left: make([]int, 2*n+1),
		Right: make([]int, 2*n+1), MissingLeft: make([]bool, 2*n+1), Value: make([]float64, 2*n+1)}
	for i := 0; i < n; i++ { // node 2i splits; 2i+1 is a leaf; 2i+2 continues
		tr.Feature[2*i], tr.Threshold[2*i], tr.Left[2*i], tr.Right[2*i] = 0, float64(i), 2*i+1, 2*i+2
		tr.Feature[2*i+1], tr.Left[2*i+1], tr.Right[2*i+1], tr.Value[2*i+1] = -1, -1, -1, float64(i)
	}
	tr.Feature[2*n], tr.Left[2*n], tr.Right[2*n], tr.Value[2*n] = -1, -1, -1, -1
	f := &Forest{Task: Regression, Features: []string{"x"}, InputPrecision: Float64, Combine: Sum,
		Transform: NoTransform, BaseScore: []float64{0}, Trees: []Tree{tr}}
	require.NoError(t, f.Validate("deep"))
	out := []float64{0}
	f.Predict([]float64{n - 1.5}, out)
	assert.Equal(t, float64(n-1), out[0])
}

func TestCombineAndTransforms(t *testing.T) {
	stump := func(a, b []float64) Tree {
		return Tree{Feature: []int{0, -1, -1}, Threshold: []float64{0, 0, 0}, Left: []int{1, -1, -1},
			Right: []int{2, -1, -1}, MissingLeft: []bool{true, false, false}, Value: append(append(make([]float64, len(a)), a...), b...)}
	}
	vote := &Forest{Task: Classification, Features: []string{"x"}, Classes: []string{"a", "b", "c"},
		InputPrecision: Float64, Combine: Vote, Transform: NoTransform, BaseScore: []float64{0, 0, 0.5},
		Trees: []Tree{stump([]float64{1, 1, 0}, []float64{0, 0, 1}), stump([]float64{0, 2, 0}, []float64{3, 0, 0})}}
	require.NoError(t, vote.Validate("v"))
	out := make([]float64, 3)
	vote.Predict([]float64{-1}, out) // tree 0 ties 1,1 → class 0; tree 1 → class 1
	assert.Equal(t, []float64{0.5, 0.5, 0.5}, out)
	assert.Equal(t, 0, vote.ClassOf(out))
	vote.Predict([]float64{math.NaN()}, out) // missing_left: same as left
	assert.Equal(t, []float64{0.5, 0.5, 0.5}, out)

	logit := &Forest{Task: Classification, Features: []string{"x"}, Classes: []string{"no", "yes"},
		InputPrecision: Float64, Combine: Sum, Transform: Logistic, BaseScore: []float64{0.25},
		Trees: []Tree{stump([]float64{-1}, []float64{2})}}
	require.NoError(t, logit.Validate("l"))
	o1 := []float64{0}
	logit.Predict([]float64{5}, o1)
	assert.Equal(t, 1/(1+math.Exp(-2.25)), o1[0])
	assert.Equal(t, 1, logit.ClassOf(o1))
	logit.Predict([]float64{-5}, o1)
	assert.Equal(t, math.Exp(-0.75)/(1+math.Exp(-0.75)), o1[0])
	assert.Equal(t, 0, logit.ClassOf(o1))

	z := []float64{1000, 1000, -1000}
	ApplyTransform(Softmax, z)
	assert.Equal(t, []float64{0.5, 0.5, 0}, z)
}

// float32 models compare the rounded value: 0.1 rounds to a float32 above
// 0.1, so it goes right at a threshold of exactly 0.1.
func TestFloat32Rounding(t *testing.T) {
	f, err := mustDecode(t, `{"sawmill_forest":1,"task":"regression","features":["a"],"input_precision":"float32",`+
		`"trees":[{"feature":[0,-1,-1],"threshold":[0.1,0,0],"left":[1,-1,-1],"right":[2,-1,-1],"value":[[0],[1],[2]]}]}`)
	require.NoError(t, err)
	out := []float64{0}
	f.Predict([]float64{0.1}, out)
	assert.Equal(t, 2.0, out[0])
	f.Predict([]float64{float64(math.Nextafter32(float32(0.1), 0))}, out)
	assert.Equal(t, 1.0, out[0])
}

func TestReadRows(t *testing.T) {
	csv := "id,b,a\n7,1.5,\n8,NaN,inf\n9,-inf,-0\n"
	r, err := ReadRows(strings.NewReader(csv), "rows.csv", []string{"a", "b"}, RowOptions{Keep: []string{"id"}})
	require.NoError(t, err)
	require.Equal(t, 3, r.Len())
	assert.True(t, math.IsNaN(r.Row(0)[0]))
	assert.Equal(t, 1.5, r.Row(0)[1])
	assert.True(t, math.IsInf(r.Row(1)[0], 1))
	assert.True(t, math.Signbit(r.Row(2)[0]))
	assert.Equal(t, []string{"9"}, r.Extra[2])

	_, err = ReadRows(strings.NewReader("a,b\n1,2\n3,abc\n"), "rows.csv", []string{"a", "b"}, RowOptions{})
	require.Error(t, err)
	assert.Equal(t, `rows.csv:3: column "b": "abc" is not a number`, err.Error())
	_, err = ReadRows(strings.NewReader("a\n1\n"), "rows.csv", []string{"a", "b"}, RowOptions{})
	assert.EqualError(t, err, `rows.csv:1: no column named "b", a feature of the model`)
}
