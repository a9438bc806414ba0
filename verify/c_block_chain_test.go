package verify

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/randmodel"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// chainTrees draws forests of up to 30 trees up to 24 deep, past
// blockCheckDepth, so that the block layout chains them where there is one
// output.
var chainTrees = randmodel.GenOptions{MaxTrees: 30, MaxFeatures: 6, MaxDepth: 24, MaxChain: 40, MaxNodes: 300, V1Only: true}

// chainForest is randmodel's forest of seed made a one-output regression
// (each node's first value kept) whose base score is -0.0 for odd seeds,
// with every third tree replaced by a single leaf (-0.0 for even trees):
// chunks then start and end on single leaves, and the sums meet -0.0 at
// both ends.
func chainForest(t *testing.T, seed uint64) *forest.Forest {
	f := randmodel.RandomForest(seed, chainTrees)
	w := f.NumOutputs()
	f.Task, f.Classes, f.Combine, f.Transform = forest.Regression, nil, forest.Sum, forest.NoTransform
	f.BaseScore = []float64{0.25}
	if seed%2 == 1 {
		f.BaseScore = []float64{math.Copysign(0, -1)}
	}
	for i := range f.Trees {
		tr := &f.Trees[i]
		if i%3 == 0 {
			v := 0.125 * float64(i+1)
			if i%2 == 0 {
				v = math.Copysign(0, -1)
			}
			*tr = forest.Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1}, MissingLeft: []bool{false}, Value: []float64{v}}
			continue
		}
		one := make([]float64, len(tr.Feature))
		for n := range one {
			one[n] = tr.Value[n*w]
		}
		tr.Value = one
	}
	require.NoError(t, f.Validate(fmt.Sprintf("seed %d", seed)))
	return f
}

// TestCBlockChained builds the block layout's chained walk (one output,
// trees deeper than blockCheckDepth) for random forests, in double and
// float, with the default chunks and with a tree a chunk (BlockChunkBytes
// 1), and scores every prefix of the rows and from row 5 (runBlockParts):
// NAME_predict_batch must give NAME_predict's bytes, and in double the
// interpreter's. Cost: 4 forests x 4 builds with gcc -O2, about 10 s.
func TestCBlockChained(t *testing.T) {
	testenv.Need(t, cTools(false))
	forests := 0
	for seed := uint64(1); seed <= 40 && forests < 4; seed++ {
		f := chainForest(t, seed)
		if p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(false)); err != nil || !chained(t, p, ctarget.Options{Layout: ctarget.Block, Name: "deep"}) {
			continue // no tree deeper than blockCheckDepth
		}
		forests++
		rows := randmodel.RandomRows(seed, f, blockPartRows)
		floats := []bool{false, true}
		if forests == 1 {
			f = negZeroForest(f) // a forest where many sums stay -0.0
			rows = randmodel.RandomRows(seed, f, blockPartRows)
			floats = []bool{false}
		}
		for _, float := range floats {
			p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(float))
			require.NoError(t, err)
			if float && ctarget.FitsFloat(p) != nil {
				continue
			}
			for _, chunk := range []int{0, 1} {
				o := ctarget.Options{Layout: ctarget.Block, Float: float, Name: "deep", BlockChunkBytes: chunk}
				t.Run(fmt.Sprintf("seed%d/float=%v/chunk=%d", seed, float, chunk), func(t *testing.T) {
					require.True(t, chained(t, p, o), "the trees are not chained")
					got, _ := runBlockParts(t, p, o, rows.Values)
					if float {
						return
					}
					out := make([]float64, 1)
					for r := range got {
						compile.Eval(p, rows.Row(r), out)
						require.Equal(t, math.Float64bits(out[0]), math.Float64bits(got[r]), "row %d: %v, C %v", r, out[0], got[r])
					}
				})
			}
		}
	}
	require.Equal(t, 4, forests, "seeds 1 to 40: want 4 forests with a tree deeper than blockCheckDepth")
}

// negZeroForest is a forest of three trees whose base score is -0.0: a
// chain of nine splits on the first feature (x <= 0, 1, ..., 8) with a
// -0.0 leaf on each left and 1 on the last right, a -0.0 leaf, and the
// chain again. A row at or below 8 adds -0.0 three times and scores -0.0,
// which adding +0.0 on the way would turn into +0.0.
func negZeroForest(f *forest.Forest) *forest.Forest {
	negZero := math.Copysign(0, -1)
	var chain forest.Tree
	for k := range 9 {
		chain.Feature = append(chain.Feature, 0, -1)
		chain.Threshold = append(chain.Threshold, float64(k), 0)
		chain.Left = append(chain.Left, 2*k+1, -1)
		chain.Right = append(chain.Right, 2*k+2, -1)
		chain.MissingLeft = append(chain.MissingLeft, true, false)
		chain.Value = append(chain.Value, 0, negZero)
	}
	chain.Feature = append(chain.Feature, -1)
	chain.Threshold = append(chain.Threshold, 0)
	chain.Left, chain.Right = append(chain.Left, -1), append(chain.Right, -1)
	chain.MissingLeft = append(chain.MissingLeft, false)
	chain.Value = append(chain.Value, 1)
	leaf := forest.Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1}, MissingLeft: []bool{false}, Value: []float64{negZero}}
	g := *f
	g.BaseScore = []float64{negZero}
	g.Trees = []forest.Tree{chain, leaf, chain}
	return &g
}

// chained says whether p is written in the block layout's chained walk.
func chained(t *testing.T, p *compile.Program, o ctarget.Options) bool {
	l, why, err := ctarget.Resolve(p, o)
	require.NoError(t, err)
	require.Equal(t, ctarget.Block, l, why)
	files, err := ctarget.Emit(p, o)
	require.NoError(t, err)
	for _, f := range files {
		if f.Name == o.Name+".c" {
			return strings.Contains(string(f.Data), o.Name+"_bk_first")
		}
	}
	t.Fatalf("no %s.c among the files", o.Name)
	return false
}
