package compile

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// Every ordering constraint holds in the pass table.
func TestPassOrder(t *testing.T) {
	pos := map[string]int{}
	for i, p := range Passes {
		_, dup := pos[p.Name]
		require.False(t, dup, "pass %s listed twice", p.Name)
		pos[p.Name] = i
	}
	for _, c := range Order {
		b, okb := pos[c.Before]
		a, oka := pos[c.After]
		require.True(t, okb && oka, "constraint names unknown pass: %+v", c)
		assert.Less(t, b, a, "%s must run before %s: %s", c.Before, c.After, c.Reason)
	}
}

func runOnly(t *testing.T, name string, p *Program) {
	t.Helper()
	for _, ps := range Passes {
		if ps.Name == name {
			ps.Fn(p)
			require.NoError(t, Check(p), "after %s", name)
			return
		}
	}
	t.Fatalf("no pass %q", name)
}

const hdr = "program regression outputs=1 combine=sum transform=none compare=double base=0\nfeature \"a\" used\nfeature \"b\" used\n"

// Pass tests as {pass, before, after} in the text form.
func TestPassTables(t *testing.T) {
	cases := []struct{ name, pass, before, after string }{
		{"decided left by ancestor", "prune", hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 4
  1 #1 x0 <= 2 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 2
  1 #2 leaf 1
  2 #4 leaf 3
`},
		{"missing keeps a test alive", "prune", hdr + `tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 4
  1 #1 x0 <= 2 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 4
  1 #1 x0 <= 2 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`},
		{"missing decided too", "prune", hdr + `tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 4
  1 #1 x0 <= 2 missing=left ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 2
  1 #2 leaf 1
  2 #4 leaf 3
`},
		{"right side, equal threshold", "prune", hdr + `tree 0
  0 #0 x1 <= 5 missing=right ? 1 : 2
  1 #1 leaf 0
  2 #2 x1 <= 5 missing=right ? 3 : 4
  3 #3 leaf 1
  4 #4 leaf 2
`, hdr + `tree 0
  0 #0 x1 <= 5 missing=right ? 1 : 2
  1 #1 leaf 0
  2 #4 leaf 2
`},
		{"other feature is no fact", "prune", hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 4
  1 #1 x1 <= 0.5 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 4
  1 #1 x1 <= 0.5 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`},
		{"identical subtrees fold", "fold", hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 4
  1 #1 x1 <= 2 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 1
  4 #4 leaf 1
`, hdr + `tree 0
  0 #2 leaf 1
`},
		{"-0 and +0 leaves differ", "fold", hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 2
  1 #1 leaf -0
  2 #2 leaf 0
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 2
  1 #1 leaf -0
  2 #2 leaf 0
`},
		{"set member bounds a numeric split", "prune", hdr + `tree 0
  0 #0 x0 in {2,3} missing=right ? 1 : 4
  1 #1 x0 <= 4 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 x0 <= 4 missing=right ? 5 : 6
  5 #5 leaf 3
  6 #6 leaf 4
`, hdr + `tree 0
  0 #0 x0 in {2,3} missing=right ? 1 : 2
  1 #2 leaf 1
  2 #4 x0 <= 4 missing=right ? 3 : 4
  3 #5 leaf 3
  4 #6 leaf 4
`},
		{"empty set sends everything right", "prune", hdr + `tree 0
  0 #0 x0 <= 0 missing=right ? 1 : 4
  1 #1 x0 in {} missing=left ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`, hdr + `tree 0
  0 #0 x0 <= 0 missing=right ? 1 : 2
  1 #3 leaf 2
  2 #4 leaf 3
`},
		{"one listed category decides a set split", "prune", hdr + `tree 0
  0 #0 x0 <= 3.5 missing=right ? 1 : 2
  1 #1 leaf 0
  2 #2 x0 <= 3.9 missing=left ? 3 : 6
  3 #3 x0 in {3} missing=left ? 4 : 5
  4 #4 leaf 1
  5 #5 leaf 2
  6 #6 leaf 3
`, hdr + `tree 0
  0 #0 x0 <= 3.5 missing=right ? 1 : 2
  1 #1 leaf 0
  2 #2 x0 <= 3.9 missing=left ? 3 : 4
  3 #4 leaf 1
  4 #6 leaf 3
`},
		{"zero band far away: decided", "prune", hdr + `tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 2
  1 #1 leaf 0
  2 #2 x0 <= 0.5 missing=left+zero ? 3 : 4
  3 #3 leaf 1
  4 #4 leaf 2
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 2
  1 #1 leaf 0
  2 #4 leaf 2
`},
		{"zero band reaches the missing side", "prune", hdr + `tree 0
  0 #0 x0 <= 1 missing=left+zero ? 1 : 2
  1 #1 x0 <= 1 missing=right ? 3 : 4
  2 #2 x0 <= -1 missing=right ? 5 : 6
  3 #3 leaf 1
  4 #4 leaf 2
  5 #5 leaf 3
  6 #6 leaf 4
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=left+zero ? 1 : 4
  1 #1 x0 <= 1 missing=right ? 2 : 3
  2 #3 leaf 1
  3 #4 leaf 2
  4 #6 leaf 4
`},
		{"set splits with other categories do not fold", "fold", hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 4
  1 #1 x1 in {1,2} missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 x1 in {1,3} missing=right ? 5 : 6
  5 #5 leaf 1
  6 #6 leaf 2
`, hdr + `tree 0
  0 #0 x0 <= 1 missing=right ? 1 : 4
  1 #1 x1 in {1,2} missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 x1 in {1,3} missing=right ? 5 : 6
  5 #5 leaf 1
  6 #6 leaf 2
`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p, err := Parse(c.before)
			require.NoError(t, err)
			runOnly(t, c.pass, p)
			assert.Equal(t, c.after, p.String())
		})
	}
}

// The text form reads back to the same program.
func TestTextRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	for i := 0; i < 50; i++ {
		f := randomForest(rng)
		p := Lower(f)
		q, err := Parse(p.String())
		require.NoError(t, err)
		assert.Equal(t, p.String(), q.String())
	}
}

// Compile then Eval equals the interpreter bit for bit on random forests and
// rows that hit thresholds, their neighbours, ±0, ±Inf and missing values:
// the whole exact pipeline, in both comparison forms for float32 models.
func TestPipelineExact(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 13))
	n := 300
	if testing.Short() {
		n = 60
	}
	removed := 0
	for i := 0; i < n; i++ {
		f := randomForest(rng)
		p, stats, err := Compile(f, Options{})
		require.NoError(t, err)
		removed += stats[0].NodesBefore - p.NumNodes()
		rows := randomRows(rng, f, 200)
		want := make([]float64, f.NumOutputs())
		got := make([]float64, f.NumOutputs())
		for _, x := range rows {
			f.Predict(x, want)
			Eval(p, x, got)
			for j := range want {
				if math.Float64bits(want[j]) != math.Float64bits(got[j]) && !(math.IsNaN(want[j]) && math.IsNaN(got[j])) {
					var b strings.Builder
					f.Encode(&b)
					t.Fatalf("forest %d, row %v, output %d: interpreter %v, program %v\nmodel:\n%s\nprogram:\n%s", i, x, j, want[j], got[j], b.String(), p)
				}
			}
		}
		if f.InputPrecision == forest.Float32 {
			// the Single form is exact for float32 inputs
			ps, _, err := Compile(f, Options{SingleInputs: true})
			require.NoError(t, err)
			require.Equal(t, Single, ps.Compare)
			for _, x := range rows {
				x32 := make([]float64, len(x))
				for j, v := range x {
					x32[j] = float64(float32(v))
				}
				f.Predict(x32, want)
				Eval(ps, x32, got)
				for j := range want {
					if math.Float64bits(want[j]) != math.Float64bits(got[j]) && !(math.IsNaN(want[j]) && math.IsNaN(got[j])) {
						t.Fatalf("forest %d (Single), row %v, output %d: interpreter %v, program %v\nprogram:\n%s", i, x32, j, want[j], got[j], ps)
					}
				}
			}
		}
	}
	t.Logf("%d forests: passes removed %d nodes", n, removed)
}

// A chain 100,000 splits deep compiles without recursion.
func TestDeepChainCompiles(t *testing.T) {
	const n = 100_000
	tr := forest.Tree{}
	for i := 0; i < n; i++ {
		tr.Feature = append(tr.Feature, i%2, -1)
		tr.Threshold = append(tr.Threshold, float64(i), 0)
		tr.Left = append(tr.Left, 2*i+1, -1)
		tr.Right = append(tr.Right, 2*i+2, -1)
		tr.MissingLeft = append(tr.MissingLeft, i%3 == 0, false)
		tr.Value = append(tr.Value, 0, float64(i))
	}
	tr.Feature, tr.Threshold, tr.Left, tr.Right = append(tr.Feature, -1), append(tr.Threshold, 0), append(tr.Left, -1), append(tr.Right, -1)
	tr.MissingLeft, tr.Value = append(tr.MissingLeft, false), append(tr.Value, -1)
	f := &forest.Forest{Task: forest.Regression, Features: []string{"a", "b"}, InputPrecision: forest.Float64,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0}, Trees: []forest.Tree{tr}}
	require.NoError(t, f.Validate("deep"))
	p, _, err := Compile(f, Options{})
	require.NoError(t, err)
	assert.Equal(t, 2*n+1, p.NumNodes(), "nothing on an alternating-feature chain is decided")
	assert.Equal(t, n, p.MaxDepth())
	out := []float64{0}
	Eval(p, []float64{500.5, 501.5}, out)
	want := []float64{0}
	f.Predict([]float64{500.5, 501.5}, want)
	assert.Equal(t, want, out)
}

// Unknown pass names are refused; asking for an exact pass as lossy too.
func TestRunOptions(t *testing.T) {
	f := randomForest(rand.New(rand.NewPCG(1, 1)))
	_, _, err := Compile(f, Options{Lossy: []string{"nope"}})
	assert.EqualError(t, err, `unknown pass "nope"`)
	_, _, err = Compile(f, Options{Lossy: []string{"prune"}})
	assert.Error(t, err)
	var b strings.Builder
	_, _, err = Compile(f, Options{DumpAfter: "fold", Dump: &b})
	require.NoError(t, err)
	assert.True(t, strings.HasPrefix(b.String(), "program "))
}
