package forest

import (
	"bytes"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// The limits of the reader: each is a clear error naming the file, and the
// tree and node where one applies, never a crash.

func writeTemp(t *testing.T, name string, data []byte) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), name)
	require.NoError(t, os.WriteFile(path, data, 0o644))
	return path
}

func encodeT(t *testing.T, f *Forest) []byte {
	t.Helper()
	var b bytes.Buffer
	require.NoError(t, f.Encode(&b))
	return b.Bytes()
}

func leafTree(v ...float64) Tree {
	return Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1},
		MissingLeft: []bool{false}, Value: v}
}

func TestLimitFileSize(t *testing.T) {
	doc, err := os.ReadFile("testdata/pump.json")
	require.NoError(t, err)
	path := writeTemp(t, "big.json", doc)
	_, err = ReadFileOptions(path, ReadOptions{MaxBytes: int64(len(doc) - 1)})
	require.Error(t, err)
	assert.Equal(t, fmt.Sprintf("%s: file is larger than the limit of %d bytes\nhint: raise the limit if the model is meant to be this large", path, len(doc)-1), err.Error())
	// At the limit it reads.
	_, err = ReadFileOptions(path, ReadOptions{MaxBytes: int64(len(doc))})
	require.NoError(t, err)
	// Decode holds bytes already in memory to the same limit.
	_, err = Decode(doc, "big.json", ReadOptions{MaxBytes: 100})
	require.Error(t, err)
	assert.True(t, strings.HasPrefix(err.Error(), "big.json: file is larger than the limit of 100 bytes"), err.Error())
	assert.Greater(t, int64(DefaultMaxFileBytes), int64(1<<20), "the default must take real models")
}

func TestLimitNodes(t *testing.T) {
	f := &Forest{Task: Regression, Features: []string{"x"}, InputPrecision: Float64, Combine: Sum,
		Transform: NoTransform, BaseScore: []float64{0}}
	for range 3 {
		f.Trees = append(f.Trees, Tree{Feature: []int{0, -1, -1}, Threshold: []float64{1, 0, 0},
			Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: make([]bool, 3), Value: []float64{0, 1, 2}})
	}
	path := writeTemp(t, "nodes.json", encodeT(t, f))
	_, err := ReadFileOptions(path, ReadOptions{MaxNodes: 8})
	require.Error(t, err)
	assert.Equal(t, path+": tree 2: the model has more than 8 nodes, the limit\nhint: raise the limit if the model is meant to be this large", err.Error())
	_, err = ReadFileOptions(path, ReadOptions{MaxNodes: 9})
	require.NoError(t, err)
	assert.Greater(t, int64(DefaultMaxNodes), int64(10_000_000), "the default must take real models")
}

// deepChain is a tree whose every split has a leaf on the left: depth n.
func deepChain(n int) Tree {
	m := 2*n + 1
	tr := Tree{Feature: make([]int, m), Threshold: make([]float64, m), Left: make([]int, m),
		Right: make([]int, m), MissingLeft: make([]bool, m), Value: make([]float64, m)}
	for i := 0; i < n; i++ {
		tr.Feature[2*i], tr.Threshold[2*i], tr.Left[2*i], tr.Right[2*i] = 0, float64(i), 2*i+1, 2*i+2
		tr.MissingLeft[2*i] = i%2 == 0
		tr.Feature[2*i+1], tr.Left[2*i+1], tr.Right[2*i+1], tr.Value[2*i+1] = -1, -1, -1, float64(i)
	}
	tr.Feature[2*n], tr.Left[2*n], tr.Right[2*n], tr.Value[2*n] = -1, -1, -1, -1
	return tr
}

// A tree 100,000 deep reads from a file, validates and scores; the same
// tree with a bad node at the bottom is rejected naming that node.
func TestLimitDeepTree(t *testing.T) {
	const n = 100_000
	f := &Forest{Task: Regression, Features: []string{"x"}, InputPrecision: Float64, Combine: Sum,
		Transform: NoTransform, BaseScore: []float64{0}, Trees: []Tree{deepChain(n)}}
	doc := encodeT(t, f)
	g, err := Decode(doc, "deep.json", ReadOptions{})
	require.NoError(t, err)
	out := []float64{0}
	g.Predict([]float64{n - 1.5}, out)
	assert.Equal(t, float64(n-1), out[0])
	g.Predict([]float64{math.NaN()}, out)
	assert.Equal(t, 0.0, out[0], "missing goes left at node 0")

	f.Trees[0].Threshold[2*(n-1)] = math.Inf(1)
	err = f.Validate("deep.json")
	require.Error(t, err)
	assert.Equal(t, fmt.Sprintf("deep.json: tree 0, node %d: threshold is +Inf", 2*(n-1)), err.Error())
}

// A classifier of 10,000 classes reads and scores; a leaf vector one short
// is named by tree and node.
func TestLimitWideVector(t *testing.T) {
	const k = 10_000
	classes := make([]string, k)
	for i := range classes {
		classes[i] = fmt.Sprintf("c%d", i)
	}
	a, b := make([]float64, k), make([]float64, k)
	a[k-1], b[3] = 1, 1
	f := &Forest{Task: Classification, Features: []string{"x"}, Classes: classes, InputPrecision: Float64,
		Combine: Average, Transform: NoTransform, BaseScore: make([]float64, k),
		Trees: []Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{0.5, 0, 0}, Left: []int{1, -1, -1},
			Right: []int{2, -1, -1}, MissingLeft: make([]bool, 3), Value: append(append(make([]float64, k), a...), b...)}}}
	doc := encodeT(t, f)
	g, err := Decode(doc, "wide.json", ReadOptions{})
	require.NoError(t, err)
	assert.Equal(t, k, g.NumOutputs())
	assert.Equal(t, k-1, g.PredictClass([]float64{0}))
	assert.Equal(t, 3, g.PredictClass([]float64{1}))

	short := bytes.Replace(doc, []byte("],[0,0,0,1,"), []byte("],[0,0,1,"), 1)
	require.NotEqual(t, doc, short)
	_, err = Decode(short, "wide.json", ReadOptions{})
	require.Error(t, err)
	assert.Equal(t, "wide.json: tree 0, node 2: value has 9999 entries, the model has 10000 outputs", err.Error())
}

// A file of many short value vectors for a model of many outputs would need
// memory far beyond its size (every node slot holds a full vector): it is
// refused, naming the tree, before anything that large is allocated.
func TestLimitValueAmplification(t *testing.T) {
	const k, n = 5000, 20_000
	var b strings.Builder
	b.WriteString(`{"sawmill_forest":1,"task":"classification","features":["x"],"classes":[`)
	for i := 0; i < k; i++ {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, `"%d"`, i)
	}
	b.WriteString(`],"trees":[{"feature":[-1` + strings.Repeat(",-1", n-1) + `],"threshold":[0` + strings.Repeat(",0", n-1) +
		`],"left":[-1` + strings.Repeat(",-1", n-1) + `],"right":[-1` + strings.Repeat(",-1", n-1) + `],"value":[[1` +
		strings.Repeat(",0", k-1) + `]` + strings.Repeat(",[]", n-1) + `]}]}`)
	doc := []byte(b.String())
	var err error
	used := allocated(func() { _, err = Decode(doc, "amp.json", ReadOptions{}) })
	require.Error(t, err)
	assert.Contains(t, err.Error(), "amp.json: tree 0: ")
	assert.Less(t, used, allocBound(len(doc)), "allocated %d bytes for %d bytes of input", used, len(doc))
}

// A feature name of 1 MB reads and scores; messages that quote it keep to a
// readable length.
func TestLimitLongName(t *testing.T) {
	long := strings.Repeat("ü", 1<<19) // 1 MiB of UTF-8
	f := &Forest{Task: Regression, Features: []string{long, "y"}, InputPrecision: Float64, Combine: Sum,
		Transform: NoTransform, BaseScore: []float64{0}, Trees: []Tree{leafTree(2)}}
	g, err := Decode(encodeT(t, f), "long.json", ReadOptions{})
	require.NoError(t, err)
	assert.Equal(t, long, g.Features[0])

	f.Features[1] = long
	err = f.Validate("long.json")
	require.Error(t, err)
	msg := err.Error()
	assert.True(t, strings.HasPrefix(msg, "long.json: feature 1 has the same name as feature 0: "), msg)
	assert.Less(t, len(msg), 300, "the message quotes a 1 MB name in full")
	assert.Contains(t, msg, "1048576 bytes")

	// And rows for it read, by that name.
	rows, err := ReadRows(strings.NewReader(long+",y\n1.5,2\n"), "rows.csv", []string{long, "y"}, RowOptions{})
	require.NoError(t, err)
	assert.Equal(t, []float64{1.5, 2}, rows.Values)
}

// Names that differ only in surrounding spaces are distinct features, and
// each finds its own column; a trimmed match is used only when unambiguous.
func TestRowsNamesWithSpaces(t *testing.T) {
	features := []string{" a", "a", "a ", "b"}
	rows, err := ReadRows(strings.NewReader("a ,a,\" a\", b\n1,2,3,4\n"), "rows.csv", features, RowOptions{})
	require.NoError(t, err)
	assert.Equal(t, []float64{3, 2, 1, 4}, rows.Values)

	_, err = ReadRows(strings.NewReader(" b,b \n1,2\n"), "rows.csv", []string{"b"}, RowOptions{})
	require.Error(t, err)
	assert.Equal(t, `rows.csv:1: columns 1 and 2 are both named "b" once spaces are trimmed`, err.Error())

	_, err = ReadRows(strings.NewReader("b,b\n1,2\n"), "rows.csv", []string{"b"}, RowOptions{})
	require.Error(t, err)
	assert.Equal(t, `rows.csv:1: columns 1 and 2 are both named "b"`, err.Error())
}

// An unterminated quote after the header is an error naming the file, not a
// panic (found by FuzzReadRows: encoding/csv's FieldPos panics on a record
// that failed with no fields).
func TestReadRowsUnterminatedQuote(t *testing.T) {
	_, err := ReadRows(strings.NewReader("x\n\""), "rows.csv", []string{"x"}, RowOptions{})
	require.Error(t, err)
	assert.True(t, strings.HasPrefix(err.Error(), "rows.csv: line 2, column "), err.Error())
}
