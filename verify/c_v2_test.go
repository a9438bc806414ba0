package verify

import (
	"math"
	"math/rand/v2"
	"slices"
	"strconv"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// Format 2 in the C target: hand-made forests for each construct, built in
// every toolchain configuration, both layouts and both variants, and held
// against the interpreter row by row (bit for bit wherever ErrorBound is 0,
// which it is under float32 accumulation).

// cSet is a set split of feature f sending the members of cats left.
func cSet(f int, cats []int32, l, r int, ml bool) cNode {
	n := cSplit(f, 0, l, r, ml)
	n.cats = cats
	if cats == nil {
		n.cats = []int32{}
	}
	return n
}

// withV2 adds the format 2 arrays to a tree built by cTree from nodes:
// categories, zero_missing on the nodes listed in zm.
func withV2(tr forest.Tree, nodes []cNode, zm ...int) forest.Tree {
	for i, n := range nodes {
		if n.cats != nil {
			if tr.Categories == nil {
				tr.Categories = make([][]int32, len(nodes))
			}
			tr.Categories[i] = n.cats
		}
	}
	if len(zm) > 0 {
		tr.ZeroMissing = make([]bool, len(nodes))
		for _, i := range zm {
			tr.ZeroMissing[i] = true
		}
	}
	return tr
}

func v2Tree(nodes []cNode, zm ...int) forest.Tree { return withV2(cTree(nodes...), nodes, zm...) }

// categoryRows puts every category edge in every column: negative values,
// -0, fractions on both sides of each listed category and of the ends of a
// set, 2^31 and its neighbours, the zero band's edges, infinities and NaN.
func categoryRows(f *forest.Forest, extra ...float64) *forest.Rows {
	vals := []float64{-1, math.Nextafter(-1, 0), -0.5, math.Copysign(0, -1), 0, 0.25, 0.5, 0.999999, 1, 1.5, 2, 3, 4, 5,
		30, 31, 31.5, 32, 33, 63, 64, 65, 100, 1000, 4095, 4096, 70000, 1 << 20, 1<<31 - 1, 1<<31 - 0.5, 1 << 31, 1<<31 + 1, 1e300,
		-1e300, -2, -1.5, 1e-36, -1e-36, forest.ZeroMissingBound, -forest.ZeroMissingBound,
		math.Nextafter(forest.ZeroMissingBound, 1), math.Nextafter(-forest.ZeroMissingBound, -1), 5e-324,
		math.Inf(1), math.Inf(-1), math.NaN(), 0.1, float64(float32(0.1)), -999, math.Nextafter(-999, 0), 1 + 0x1p-30, 2 - 0x1p-30}
	return valueRows(f, append(vals, extra...), 5)
}

// setForest has set splits of every kind: a one-word bitset, a bitset of
// several words from a category far from 0, a sparse list (a binary
// search), an empty list, a list holding 0 and 2^31-1; missing values both
// ways, zero-as-missing on some splits, numeric splits beside them.
func setForest(t *testing.T, m forest.CategoryMatch, missing *float64) *forest.Forest {
	many := []int32{}
	for c := int32(4000); c < 4200; c += 3 {
		many = append(many, c)
	}
	t0 := []cNode{cSet(0, []int32{0, 1, 3, 31}, 1, 2, false), cSet(1, many, 3, 4, true), cLeaf(5), cLeaf(1.25), cLeaf(-2)}
	t1 := []cNode{cSet(1, []int32{0, 2, 70000, 1<<31 - 1}, 1, 2, true), cSplit(0, 0.5, 3, 4, false), cSet(0, nil, 5, 6, true),
		cLeaf(0.5), cLeaf(-0.75), cLeaf(8), cLeaf(16)}
	t2 := []cNode{cSplit(2, 0, 1, 2, true), cSet(2, []int32{1, 32, 33, 64}, 3, 4, false), cLeaf(3), cLeaf(0.125), cLeaf(0.0625)}
	f := &forest.Forest{
		Task: forest.Regression, Features: []string{"pump_model", "site", "valve_state"}, Combine: forest.Sum,
		BaseScore: []float64{0.5}, CategoryMatch: m,
		Trees: []forest.Tree{v2Tree(t0, 1), v2Tree(t1, 2), v2Tree(t2, 0, 1)},
	}
	if missing != nil {
		f.HasMissingValue, f.MissingValue = true, *missing
	}
	return mustValidate(t, f)
}

func TestCV2SetSplits(t *testing.T) {
	for _, m := range []forest.CategoryMatch{forest.MatchFloor, forest.MatchTruncate, forest.MatchExact} {
		t.Run(string(m), func(t *testing.T) {
			f := setForest(t, m, nil)
			checkC(t, f, categoryRows(f))
		})
	}
}

// A missing_value sentinel, in a float64 model and in a float32 one whose
// sentinel (0.1) is not a float: the band is then every double that
// rounds to float(0.1), and set splits see the input rounded to float.
func TestCV2MissingValue(t *testing.T) {
	for _, mv := range []float64{-999, 0, 0.1} {
		for _, prec := range []forest.Precision{forest.Float64, forest.Float32} {
			t.Run(string(prec)+"-"+strconv.FormatFloat(mv, 'g', -1, 64), func(t *testing.T) {
				f := setForest(t, forest.MatchFloor, &mv)
				f.InputPrecision = prec
				f = mustValidate(t, f)
				b := float64(float32(0.1))
				checkC(t, f, categoryRows(f, math.Nextafter(b, 1), math.Nextafter(b, 0), 0.1+0x1p-30, 31.999999999, math.Nextafter(32, 0)))
			})
		}
	}
}

// Trees of one output under float32 accumulation, as boosting libraries
// grow them: softmax over three classes, the base score not a float
// (rounded first), sums that lose bits in float; and the same trees
// averaged, and mixed with a tree adding to every output.
func TestCV2Float32Softmax(t *testing.T) {
	leaf := func(v float64) cNode { return cLeaf(float64(float32(v))) }
	trees := []forest.Tree{}
	for i := 0; i < 9; i++ {
		tr := cTree(cSplit(i%3, 0.3*float64(i), 1, 2, i%2 == 0), leaf(0.1*float64(i+1)), cSplit((i+1)%3, -0.7, 3, 4, false), leaf(-1.3e-3*float64(i)), leaf(16777216+float64(i)))
		tr.HasOutput, tr.Output = true, i%3
		trees = append(trees, tr)
	}
	for _, combine := range []forest.Combine{forest.Sum, forest.Average} {
		for _, mixed := range []bool{false, true} {
			name := string(combine)
			ts := append([]forest.Tree(nil), trees...)
			if mixed {
				name += "-mixed"
				ts = append(ts, cTree(cSplit(1, 0.2, 1, 2, true), cLeaf(0.5, -0.25, float64(float32(1e-7))), cLeaf(-0.5, 1, 2)))
			}
			t.Run(name, func(t *testing.T) {
				f := mustValidate(t, &forest.Forest{
					Task: forest.Classification, Features: []string{"vibration_rms", "bearing_temp_c", "motor_current_a"},
					Classes: []string{"healthy", "imbalance", "bearing_wear"}, Combine: combine, Transform: forest.Softmax,
					Accumulate: forest.Float32, BaseScore: []float64{0.5, 0.1, -0.3}, Trees: ts,
				})
				checkC(t, f, probeRows(f))
			})
		}
	}
}

// Float32 accumulation with every transform, a scale, one output and
// several, in regression and binary classification.
func TestCV2Float32Transforms(t *testing.T) {
	tree := func(a, b, c float64) forest.Tree {
		return cTree(cSplit(0, 0.5, 1, 2, false), cLeaf(float64(float32(a))), cSplit(1, 1e-3, 3, 4, true), cLeaf(float64(float32(b))), cLeaf(float64(float32(c))))
	}
	for _, tc := range []struct {
		name  string
		tr    forest.Transform
		scale float64
		k     int
	}{
		{"logistic", forest.Logistic, 0, 1}, {"logistic-scaled", forest.Logistic, -0.3, 1},
		{"exp", forest.Exp, 0, 1}, {"exp-scaled", forest.Exp, 1.7, 1}, {"none-scaled", forest.NoTransform, 0.1, 1},
		{"logistic_each", forest.LogisticEach, 0, 2}, {"normalize", forest.Normalize, 0, 3}, {"exp-3", forest.Exp, 2.5, 3},
	} {
		for _, acc := range []forest.Precision{forest.Float32, forest.Float64} {
			t.Run(tc.name+"-"+string(acc), func(t *testing.T) {
				var trees []forest.Tree
				for i := 0; i < 7; i++ {
					tr := tree(0.37*float64(i)-1, -0.11*float64(i*i), 3.3-float64(i))
					if tc.k > 1 {
						tr.HasOutput, tr.Output = true, i%tc.k
					}
					trees = append(trees, tr)
				}
				f := &forest.Forest{Task: forest.Regression, Features: []string{"a", "b"}, Combine: forest.Sum,
					Transform: tc.tr, TransformScale: tc.scale, Accumulate: acc, Trees: trees, BaseScore: make([]float64, tc.k)}
				f.BaseScore[0] = 0.5
				if tc.k > 1 {
					f.Outputs = tc.k
				}
				if tc.tr == forest.Logistic {
					f.Task, f.Classes = forest.Classification, []string{"healthy", "failing"}
				}
				f = mustValidate(t, f)
				checkC(t, f, probeRows(f))
			})
		}
	}
}

// Set splits of 5,000 categories: a dense one (a bitset of 313 words) and
// a sparse one over [0, 2^31) (a sorted list, searched), with rows at every
// member, beside every member and at the ends. Each is static data, so the
// file builds as fast as a small model (the build time is logged).
func TestCThousandsOfCategories(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 5000))
	dense, sparse := map[int32]bool{}, map[int32]bool{}
	for len(dense) < 5000 {
		dense[rng.Int32N(10000)] = true
	}
	for len(sparse) < 5000 {
		sparse[rng.Int32N(1<<31-1)] = true
	}
	sorted := func(m map[int32]bool) []int32 {
		var s []int32
		for c := range m {
			s = append(s, c)
		}
		slices.Sort(s)
		return s
	}
	d, s := sorted(dense), sorted(sparse)
	nodes := []cNode{cSet(0, d, 1, 2, false), cSet(1, s, 3, 4, true), cLeaf(1), cLeaf(2), cLeaf(3)}
	f := mustValidate(t, &forest.Forest{Task: forest.Regression, Features: []string{"part_code", "serial"}, Combine: forest.Sum,
		BaseScore: []float64{0}, Trees: []forest.Tree{v2Tree(nodes)}})
	rows := &forest.Rows{Features: f.Features}
	add := func(a, b float64) {
		rows.Values = append(rows.Values, a, b)
		rows.Line = append(rows.Line, len(rows.Line)+2)
	}
	for i := 0; i < 5000; i += 7 {
		add(float64(d[i]), float64(s[i]))
		add(float64(d[i])+0.5, float64(s[i])+1)
		add(float64(d[i])-1, float64(s[i])-1)
		add(1e4+float64(i), float64(s[i])+0.5)
	}
	for _, v := range []float64{-1, 0, 1<<31 - 1, 1 << 31, math.NaN(), math.Inf(1)} {
		add(v, v)
	}
	checkC(t, f, rows)
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	files, err := ctarget.Emit(p, ctarget.Options{Name: cName})
	require.NoError(t, err)
	src := string(files[1].Data)
	require.Contains(t, src, cName+"_set_bits[313]", "the dense split is a bitset")
	require.Contains(t, src, cName+"_set_list[5000]", "the sparse split is a sorted list")
}

// Eighty set splits: nested code keeps the membership test out of line
// (ctarget's noinlineSites), which every compiler must still build and run.
func TestCV2ManySetSplits(t *testing.T) {
	rng := rand.New(rand.NewPCG(80, 3))
	var trees []forest.Tree
	for ti := 0; ti < 10; ti++ {
		var nodes []cNode
		for i := 0; i < 15; i++ {
			if i >= 7 {
				nodes = append(nodes, cLeaf(float64(rng.IntN(16))/4))
				continue
			}
			var cats []int32
			for c := int32(0); c < 40; c++ {
				if rng.IntN(2) == 0 {
					cats = append(cats, c)
				}
			}
			nodes = append(nodes, cSet(rng.IntN(3), cats, 2*i+1, 2*i+2, rng.IntN(2) == 0))
		}
		trees = append(trees, v2Tree(nodes, 0))
	}
	f := mustValidate(t, &forest.Forest{Task: forest.Regression, Features: []string{"a", "b", "c"}, Combine: forest.Sum,
		BaseScore: []float64{0}, Trees: trees})
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	files, err := ctarget.Emit(p, ctarget.Options{Name: cName, Layout: "nested"})
	require.NoError(t, err)
	require.Contains(t, string(files[1].Data), "__attribute__((noinline))")
	checkC(t, f, categoryRows(f))
}
