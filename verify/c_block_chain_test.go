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
	return strings.Contains(blockSource(t, p, o), o.Name+"_bk_first")
}

// blockSource is the C file of p in the block layout, which o must get.
func blockSource(t *testing.T, p *compile.Program, o ctarget.Options) string {
	l, why, err := ctarget.Resolve(p, o)
	require.NoError(t, err)
	require.Equal(t, ctarget.Block, l, why)
	files, err := ctarget.Emit(p, o)
	require.NoError(t, err)
	for _, f := range files {
		if f.Name == o.Name+".c" {
			return string(f.Data)
		}
	}
	t.Fatalf("no %s.c among the files", o.Name)
	return ""
}

// TestCBlockBig builds the lockstep block walk of a forest whose nodes pass
// blockBigNodes (24 complete trees of depth 12, two classes: 196,584
// nodes), which takes blocks of 1,024 rows and fetches each next tree's
// nodes while a tree is walked, and scores every prefix of the rows and
// from row 5 (runBlockParts): NAME_predict_batch must give NAME_predict's
// bytes and the interpreter's. Cost: one build of a 13 MB C file, about
// 2 s of gcc -O2.
func TestCBlockBig(t *testing.T) {
	testenv.Need(t, cTools(false))
	f := bigForest()
	require.NoError(t, f.Validate("big"))
	rows := randmodel.RandomRows(7, f, blockPartRows)
	p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(false))
	require.NoError(t, err)
	o := ctarget.Options{Layout: ctarget.Block, Name: "deep"}
	src := blockSource(t, p, o)
	require.True(t, strings.Contains(src, "#define DEEP_BK_ROWS 1024u"), "big blocks")
	require.True(t, strings.Contains(src, "deep_bk_fetch(deep_bk_kid + next"), "the next tree fetched")
	got, _ := runBlockParts(t, p, o, rows.Values)
	out := make([]float64, 2)
	for r := 0; r < len(got)/2; r++ {
		compile.Eval(p, rows.Row(r), out)
		for j := range out {
			require.Equal(t, math.Float64bits(out[j]), math.Float64bits(got[2*r+j]), "row %d output %d", r, j)
		}
	}
}

// bigForest is 24 complete trees of depth 12, a feature a level (so that
// compiling prunes no split), thresholds among a few values, each leaf one
// of four class-probability pairs, siblings' different.
func bigForest() *forest.Forest {
	f := &forest.Forest{Task: forest.Classification, Features: []string{"a", "b", "c", "d", "e", "f", "g", "h", "i", "j", "k", "l"},
		Classes: []string{"no", "yes"}, InputPrecision: forest.Float64, Combine: forest.Average,
		Transform: forest.NoTransform, BaseScore: []float64{0, 0}}
	pairs := [][2]float64{{1, 0}, {0, 1}, {0.25, 0.75}, {0.5, 0.5}}
	for t := range 24 {
		var tr forest.Tree
		var grow func(depth, at int) int
		grow = func(depth, at int) int {
			id := len(tr.Feature)
			tr.Feature = append(tr.Feature, -1)
			tr.Threshold = append(tr.Threshold, 0)
			tr.Left, tr.Right = append(tr.Left, -1), append(tr.Right, -1)
			tr.MissingLeft = append(tr.MissingLeft, at%2 == 0)
			pair := pairs[(at*7+t)%len(pairs)]
			tr.Value = append(tr.Value, pair[0], pair[1])
			if depth == 12 {
				return id
			}
			tr.Feature[id] = depth
			tr.Threshold[id] = float64((at*5+t)%9) - 4
			l := grow(depth+1, 2*at+1)
			r := grow(depth+1, 2*at+2)
			tr.Left[id], tr.Right[id] = l, r
			return id
		}
		grow(0, 0)
		f.Trees = append(f.Trees, tr)
	}
	return f
}
