package compile

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/sawmill-dev/sawmill/forest"
)

// randomForest makes a small random valid forest with repeated and adjacent
// thresholds, every combine, transform and precision, and both missing
// directions, so that the passes have work to do.
func randomForest(rng *rand.Rand) *forest.Forest {
	nf := 1 + rng.IntN(4)
	f := &forest.Forest{InputPrecision: forest.Float64, Transform: forest.NoTransform}
	for i := 0; i < nf; i++ {
		f.Features = append(f.Features, fmt.Sprintf("f%d", i))
	}
	if rng.IntN(2) == 0 {
		f.Task = forest.Regression
		f.Combine = []forest.Combine{forest.Sum, forest.Average}[rng.IntN(2)]
	} else {
		f.Task = forest.Classification
		nc := 2 + rng.IntN(3)
		for i := 0; i < nc; i++ {
			f.Classes = append(f.Classes, fmt.Sprintf("c%d", i))
		}
		f.Combine = []forest.Combine{forest.Sum, forest.Average, forest.Vote}[rng.IntN(3)]
		switch rng.IntN(3) {
		case 1:
			f.Transform = forest.Softmax
		case 2:
			if nc == 2 && f.Combine != forest.Vote {
				f.Transform = forest.Logistic
			}
		}
	}
	if rng.IntN(2) == 0 {
		f.InputPrecision = forest.Float32
	}
	k := f.NumOutputs()
	f.BaseScore = make([]float64, k)
	for j := range f.BaseScore {
		if rng.IntN(2) == 0 {
			f.BaseScore[j] = rng.NormFloat64()
		}
	}
	pool := thresholdPool(rng)
	for ti := 0; ti < 1+rng.IntN(4); ti++ {
		f.Trees = append(f.Trees, randomTree(rng, nf, k, pool))
	}
	if rng.IntN(2) == 0 {
		addV2(rng, f, pool)
	}
	if err := f.Validate("random"); err != nil {
		panic(err)
	}
	return f
}

// addV2 gives a random forest version 2 constructs, each with some
// chance: more outputs for a regression model, trees of one output, set
// splits with random lists (small, at the top of the range, at float32's
// integer limit), zero_missing splits, a category rule, a missing value,
// float32 accumulation, every transform and a scale.
func addV2(rng *rand.Rand, f *forest.Forest, pool []float64) {
	if f.Task == forest.Regression && rng.IntN(2) == 0 {
		k := 2 + rng.IntN(2)
		f.Outputs = k
		f.BaseScore = make([]float64, k)
		for j := range f.BaseScore {
			f.BaseScore[j] = float64(rng.IntN(9)-4) / 8
		}
		for ti := range f.Trees {
			t := &f.Trees[ti]
			old := t.Value
			t.Value = nil
			for i := range t.Left {
				for j := 0; j < k; j++ {
					t.Value = append(t.Value, old[i]+float64(j)/4)
				}
			}
		}
	}
	k := f.NumOutputs()
	if f.Combine != forest.Vote && rng.IntN(2) == 0 {
		for ti := range f.Trees {
			if rng.IntN(3) == 0 {
				continue
			}
			t := &f.Trees[ti]
			o := (ti + rng.IntN(2)) % k
			var v []float64
			for i := range t.Left {
				v = append(v, t.Value[i*k+o])
			}
			t.HasOutput, t.Output, t.Value = true, o, v
		}
		if f.Combine == forest.Average {
			for j := 0; j < k; j++ { // every output needs a tree to average
				f.Trees = append(f.Trees, forest.Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1},
					Right: []int{-1}, MissingLeft: []bool{false}, Value: []float64{float64(j) / 2}, HasOutput: true, Output: j})
			}
		}
	}
	cats := rng.IntN(2) == 0
	zeros := rng.IntN(2) == 0
	for ti := range f.Trees {
		t := &f.Trees[ti]
		for i, l := range t.Left {
			if l == -1 {
				continue
			}
			if cats && rng.IntN(2) == 0 {
				if t.Categories == nil {
					t.Categories = make([][]int32, len(t.Left))
				}
				t.Categories[i] = randomCategories(rng)
				t.Threshold[i] = 0
			}
			if zeros && rng.IntN(3) == 0 {
				if t.ZeroMissing == nil {
					t.ZeroMissing = make([]bool, len(t.Left))
				}
				t.ZeroMissing[i] = true
			}
		}
	}
	f.CategoryMatch = []forest.CategoryMatch{"", forest.MatchFloor, forest.MatchTruncate, forest.MatchExact}[rng.IntN(4)]
	if rng.IntN(3) == 0 {
		f.HasMissingValue = true
		f.MissingValue = []float64{0, -999, 1, pool[rng.IntN(len(pool))]}[rng.IntN(4)]
	}
	if rng.IntN(2) == 0 {
		f.Accumulate = forest.Float32
		if rng.IntN(2) == 0 {
			for j, b := range f.BaseScore {
				f.BaseScore[j] = forest.Round32(b)
			}
		}
	}
	trs := []forest.Transform{forest.NoTransform, forest.Exp, forest.LogisticEach, forest.Normalize}
	if k > 1 {
		trs = append(trs, forest.Softmax)
	} else if f.Task == forest.Regression {
		trs = append(trs, forest.Logistic)
	}
	// a binary classifier's logistic fixes its one output; keep it
	if f.Transform != forest.Logistic && (f.Task == forest.Regression || rng.IntN(2) == 0) {
		f.Transform = trs[rng.IntN(len(trs))]
	}
	if rng.IntN(2) == 0 {
		f.TransformScale = []float64{0.5, -1.5, 1e-3, 3, 1.0000001, 1e-50, 1e50}[rng.IntN(7)]
	}
}

// randomCategories is a sorted list of distinct categories: small ones,
// ones at float32's integer limit (2^24), at the top of the range, or none.
func randomCategories(rng *rand.Rand) []int32 {
	var c []int32
	switch rng.IntN(5) {
	case 0:
		return []int32{}
	case 1:
		c = []int32{1 << 24, 1<<24 + 1, 1<<24 + 2}
	case 2:
		c = []int32{0, 1<<31 - 2, 1<<31 - 1}
	}
	for i := 0; i < 1+rng.IntN(4); i++ {
		c = append(c, int32(rng.IntN(8)))
	}
	slices.Sort(c)
	return slices.Compact(c)
}

func thresholdPool(rng *rand.Rand) []float64 {
	pool := []float64{0, math.Copysign(0, -1), 0.1, 1, -1, 1e-310, 0.5}
	for i := 0; i < 4; i++ {
		v := math.Round(rng.NormFloat64()*8) / 4
		pool = append(pool, v, math.Nextafter(v, 9), float64(math.Nextafter32(float32(v), 9)))
	}
	return pool
}

func randomTree(rng *rand.Rand, nf, k int, pool []float64) forest.Tree {
	var t forest.Tree
	add := func() int {
		t.Feature = append(t.Feature, -1)
		t.Threshold = append(t.Threshold, 0)
		t.Left = append(t.Left, -1)
		t.Right = append(t.Right, -1)
		t.MissingLeft = append(t.MissingLeft, false)
		for j := 0; j < k; j++ {
			v := float64(rng.IntN(5)) / 4
			if rng.IntN(10) == 0 {
				v = -v
			}
			t.Value = append(t.Value, v)
		}
		return len(t.Left) - 1
	}
	type item struct{ node, depth int }
	stack := []item{{add(), 0}}
	for len(stack) > 0 {
		it := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		if it.depth >= 6 || rng.IntN(4) == 0 {
			continue
		}
		i := it.node
		t.Feature[i] = rng.IntN(nf)
		t.Threshold[i] = pool[rng.IntN(len(pool))]
		t.MissingLeft[i] = rng.IntN(2) == 0
		l, r := add(), add()
		t.Left[i], t.Right[i] = l, r
		stack = append(stack, item{l, it.depth + 1}, item{r, it.depth + 1})
	}
	return t
}

// randomRows draws rows that hit thresholds exactly, their float64 and
// float32 neighbours, ±0, ±Inf and missing values.
func randomRows(rng *rand.Rand, f *forest.Forest, n int) [][]float64 {
	var ts []float64
	for _, t := range f.Trees {
		for i, l := range t.Left {
			if l != -1 {
				ts = append(ts, t.Threshold[i])
			}
		}
	}
	ts = append(ts, 0, forest.ZeroMissingBound, -forest.ZeroMissingBound, 0x1p-150, -1, -0.5, 0.5, 2.5, 1<<24+1, 1<<31, 1<<31-1, 1<<31-64)
	if f.HasMissingValue {
		ts = append(ts, f.MissingValue)
	}
	for _, t := range f.Trees {
		for _, cs := range t.Categories {
			for _, c := range cs {
				ts = append(ts, float64(c), float64(c)+1, float64(c)-0.5)
			}
		}
	}
	rows := make([][]float64, n)
	for r := range rows {
		x := make([]float64, len(f.Features))
		for j := range x {
			t := ts[rng.IntN(len(ts))]
			switch rng.IntN(9) {
			case 0:
				x[j] = math.NaN()
			case 1:
				x[j] = math.Inf(1 - 2*rng.IntN(2))
			case 2:
				x[j] = math.Nextafter(t, math.Inf(1-2*rng.IntN(2)))
			case 3:
				x[j] = float64(math.Nextafter32(float32(t), float32(math.Inf(1-2*rng.IntN(2)))))
			case 4:
				x[j] = float64(float32(t))
			case 5:
				x[j] = rng.NormFloat64() * 4
			case 6:
				x[j] = math.Copysign(0, -1)
			default:
				x[j] = t
			}
		}
		rows[r] = x
	}
	return rows
}
