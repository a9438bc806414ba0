package verify

import (
	"context"
	"fmt"
	"math"
	"math/bits"
	"math/rand/v2"
	"os"
	"slices"
	"testing"
	"time"

	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/internal/testenv"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// Hand-made forests for the C target: the corners its code must get right
// (deep trees, "<" thresholds from float32 models, thresholds past float
// range, signed zeros, subnormals, infinities, NaN both ways, names that
// are hostile to C), built in every toolchain configuration and held
// against the interpreter row by row.

// cNode is one node of a hand-made tree: a split when left >= 0.
type cNode struct {
	f           int
	t           float64
	left, right int
	ml          bool
	v           []float64
	cats        []int32 // a set split's categories (format 2); nil at a numeric split
}

func cSplit(f int, t float64, l, r int, ml bool) cNode {
	return cNode{f: f, t: t, left: l, right: r, ml: ml}
}

func cLeaf(v ...float64) cNode { return cNode{f: -1, left: -1, right: -1, v: v} }

func cTree(nodes ...cNode) forest.Tree {
	var t forest.Tree
	for _, n := range nodes {
		t.Feature = append(t.Feature, n.f)
		t.Threshold = append(t.Threshold, n.t)
		t.Left = append(t.Left, n.left)
		t.Right = append(t.Right, n.right)
		t.MissingLeft = append(t.MissingLeft, n.ml)
		v := n.v
		if v == nil {
			v = make([]float64, len(nodes[firstLeaf(nodes)].v))
		}
		t.Value = append(t.Value, v...)
	}
	return t
}

func firstLeaf(nodes []cNode) int {
	for i, n := range nodes {
		if n.left < 0 {
			return i
		}
	}
	panic("BUG: tree without a leaf")
}

func mustValidate(t *testing.T, f *forest.Forest) *forest.Forest {
	t.Helper()
	if f.InputPrecision == "" {
		f.InputPrecision = forest.Float64
	}
	if f.Transform == "" {
		f.Transform = forest.NoTransform
	}
	if f.BaseScore == nil {
		f.BaseScore = make([]float64, f.NumOutputs())
	}
	require.NoError(t, f.Validate("model.json"))
	return f
}

// probeRows are values every split should meet: each threshold, its float
// and double neighbours, and the special values.
func probeRows(f *forest.Forest) *forest.Rows {
	special := []float64{math.NaN(), 0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1), 5e-324, -5e-324,
		0x1p-149, -0x1p-149, math.MaxFloat32, -math.MaxFloat32, math.MaxFloat64, -math.MaxFloat64, 1, -1}
	var vals []float64
	for ti := range f.Trees {
		tr := &f.Trees[ti]
		for i := range tr.Left {
			if tr.IsLeaf(i) {
				continue
			}
			th := tr.Threshold[i]
			t32 := float64(float32(th))
			vals = append(vals, th, math.Nextafter(th, math.Inf(1)), math.Nextafter(th, math.Inf(-1)), t32,
				float64(math.Nextafter32(float32(th), float32(math.Inf(1)))), float64(math.Nextafter32(float32(th), float32(math.Inf(-1)))))
		}
	}
	return valueRows(f, append(vals, special...), 7)
}

// valueRows puts each value in every column of a row of its own, and mixes
// them in as many more rows, column j of row i taking value i + j*stride.
func valueRows(f *forest.Forest, vals []float64, stride int) *forest.Rows {
	nf := len(f.Features)
	rows := &forest.Rows{Features: f.Features}
	for i, v := range vals {
		for j := 0; j < nf; j++ {
			rows.Values = append(rows.Values, vals[(i+j*stride)%len(vals)])
		}
		rows.Line = append(rows.Line, len(rows.Line)+2)
		for j := 0; j < nf; j++ {
			rows.Values = append(rows.Values, v)
		}
		rows.Line = append(rows.Line, len(rows.Line)+2)
	}
	return rows
}

// reference scores rows with the interpreter, after rounding them to float32
// when the variant takes float inputs.
func cReference(f *forest.Forest, rows *forest.Rows, float bool) ([]float64, []int) {
	r := rows
	if float {
		r = &forest.Rows{Features: rows.Features, Line: rows.Line, Values: make([]float64, len(rows.Values))}
		for i, v := range rows.Values {
			r.Values[i] = float64(float32(v))
		}
	}
	c := &goldencase.Case{Model: f, Rows: r}
	return c.Reference()
}

// checkC scores f in every layout and variant and compares.
func checkC(t *testing.T, f *forest.Forest, rows *forest.Rows) {
	t.Helper()
	testenv.Need(t, cTools(testConfig.AllCompilers))
	r := testCRunner()
	r.Full = true
	for _, variant := range r.Variants() {
		for _, layout := range r.Layouts() {
			t.Run(layout+"-"+variant, func(t *testing.T) {
				t.Parallel()
				p, _, err := compile.Compile(f, r.CompileOptions(variant))
				require.NoError(t, err)
				res, err := r.Score(context.Background(), p, layout, variant, rows, t.TempDir())
				if variant == "float" && ctarget.FitsFloat(p) != nil {
					require.ErrorIs(t, err, ErrDeclined, "float C must decline what it cannot bound")
					return
				}
				require.NoError(t, err)
				want, wantCls := cReference(f, rows, variant == "float")
				exact, bound := r.Tolerance(variant, p)
				m := Compare(want, res.Outputs, wantCls, res.Classes, f.NumOutputs(), exact, bound)
				require.True(t, m.OK(), "%s", m)
				t.Logf("%s (bound %g); build %v", m, bound, res.Build.Round(1e6))
			})
		}
	}
}

// A float32 model whose thresholds are not float values, lie at ±0, in the
// subnormals, and beyond float range on both sides (the float form of the
// last is "x < -FLT_MAX", the one "<" the table keeps).
func TestCFloat32Thresholds(t *testing.T) {
	f := mustValidate(t, &forest.Forest{
		Task: forest.Regression, Features: []string{"a", "b"}, InputPrecision: forest.Float32, Combine: forest.Sum,
		BaseScore: []float64{0.5},
		Trees: []forest.Tree{
			cTree(cSplit(0, 0.1, 1, 2, false), cLeaf(1), cSplit(1, -1e300, 3, 4, true), cLeaf(2), cSplit(1, 1e300, 5, 6, false), cLeaf(3), cLeaf(4)),
			cTree(cSplit(1, 1e-40, 1, 2, true), cSplit(0, math.Copysign(0, -1), 3, 4, false), cLeaf(-0.25), cLeaf(0.125), cLeaf(math.Copysign(0, -1))),
			cTree(cSplit(0, 5e-324, 1, 2, false), cLeaf(1e-30), cSplit(0, -5e-324, 3, 4, true), cLeaf(7), cLeaf(1.0/3)),
		},
	})
	checkC(t, f, probeRows(f))
}

// Sum with a base score and a logistic, signed zeros in leaves and base,
// NaN going left and right, and a double model with thresholds at the ends
// of the double range (float C turns -MaxFloat64 into x < -FLT_MAX).
func TestCLogisticSignedZeros(t *testing.T) {
	negz := math.Copysign(0, -1)
	f := mustValidate(t, &forest.Forest{
		Task: forest.Classification, Features: []string{"vibration_rms", "bearing_temp_c", "motor_current_a"},
		Classes: []string{"healthy", "bearing_wear"}, Combine: forest.Sum, Transform: forest.Logistic,
		BaseScore: []float64{negz},
		Trees: []forest.Tree{
			cTree(cSplit(0, 0.5, 1, 2, true), cLeaf(negz), cSplit(1, -math.MaxFloat64, 3, 4, false), cLeaf(3.5), cLeaf(-2.25)),
			cTree(cSplit(2, math.MaxFloat64, 1, 2, true), cSplit(1, 61.5, 3, 4, false), cLeaf(40), cLeaf(-0.75), cLeaf(negz)),
			cTree(cLeaf(negz)),
		},
	})
	checkC(t, f, probeRows(f))
}

// Average of three-class vectors with softmax, -0 in every leaf of one tree
// (the average starts at +0, as the interpreter's does), one feature.
func TestCSoftmaxOneFeature(t *testing.T) {
	negz := math.Copysign(0, -1)
	f := mustValidate(t, &forest.Forest{
		Task: forest.Classification, Features: []string{"flow_m3h"}, Classes: []string{"healthy", "cavitation", "misalignment"},
		Combine: forest.Average, Transform: forest.Softmax, BaseScore: []float64{negz, 0.25, -1e-310},
		Trees: []forest.Tree{
			cTree(cSplit(0, 3, 1, 2, false), cLeaf(negz, negz, negz), cLeaf(negz, 1, negz)),
			cTree(cSplit(0, 2, 1, 2, true), cLeaf(1, 2, 3), cSplit(0, 4, 3, 4, false), cLeaf(3, 3, 1e-300), cLeaf(0, 0, 700)),
			cTree(cLeaf(0.5, 0.5, 0.5)),
		},
	})
	checkC(t, f, probeRows(f))
}

// A tree 2,000 splits deep (too deep to nest: the goto form) beside a small
// one; auto must also build it.
func TestCDeepTree(t *testing.T) {
	const depth = 2000
	var nodes []cNode
	for i := 0; i < depth; i++ {
		// node 2i splits; its left child is a leaf, its right the next split.
		nodes = append(nodes, cSplit(i%2, float64(i)/depth, 2*i+1, 2*i+2, i%3 == 0), cLeaf(float64(i)))
	}
	nodes = append(nodes, cLeaf(-1))
	// renumber: split 2i at index 2i, leaf at 2i+1, next split at 2i+2
	f := mustValidate(t, &forest.Forest{
		Task: forest.Regression, Features: []string{"a", "b"}, Combine: forest.Average,
		Trees: []forest.Tree{cTree(nodes...), cTree(cSplit(0, 0.5, 1, 2, false), cLeaf(1), cLeaf(2))},
	})
	rows := &forest.Rows{Features: f.Features}
	for i := 0; i <= depth; i += 7 {
		v := float64(i) / depth
		for _, x := range []float64{v, math.Nextafter(v, 2), math.NaN()} {
			rows.Values = append(rows.Values, x, x)
			rows.Line = append(rows.Line, len(rows.Line)+2)
		}
	}
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	require.Greater(t, p.MaxDepth(), ctarget.MaxNesting, "the tree must be deeper than the nesting bound")
	checkC(t, f, rows)
	layout, _, err := ctarget.Resolve(p, ctarget.Options{})
	require.NoError(t, err)
	res, err := testCRunner().Score(context.Background(), p, emit.Auto, "double", rows, t.TempDir())
	require.NoError(t, err, "auto (%s)", layout)
	want, _ := cReference(f, rows, false)
	m := Compare(want, res.Outputs, nil, nil, 1, true, 0)
	require.True(t, m.OK(), "auto (%s): %s", layout, m)
}

// Names that could end a comment or a string early, form trigraphs, collide
// once made identifiers, or are C keywords and reserved identifiers.
func TestCHostileNames(t *testing.T) {
	names := []string{"end */ here", "/* open", "??/", "???/", `back\slash`, `quote"d`, "line\nbreak", "int", "return",
		"_Bool", "__reserved", "E2BIG", "errno", "isdigit", "naïve température", "abc", "ABC", "a-b", "a_b", "123", "-", "tab\there", "trail\\"}
	nf := len(names)
	onehot := func(i int) []float64 { v := make([]float64, 4); v[i%4] = 1; return v }
	var nodes []cNode
	for i := 0; i < nf; i++ {
		nodes = append(nodes, cSplit(i, float64(i), 2*i+1, 2*i+2, i%2 == 0), cLeaf(onehot(i)...))
	}
	nodes = append(nodes, cLeaf(onehot(3)...))
	f := mustValidate(t, &forest.Forest{
		Task: forest.Classification, Features: names, Classes: []string{"ok */", `no"pe \`, "??=", "int"},
		Combine: forest.Vote,
		Trees:   []forest.Tree{cTree(nodes...)},
	})
	checkC(t, f, probeRows(f))

	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	files, err := ctarget.Emit(p, ctarget.Options{Name: cName})
	require.NoError(t, err)
	for _, file := range files {
		for i, c := range file.Data {
			require.True(t, c == '\n' || c == '\t' || c >= 0x20 && c < 0x7f, "%s: byte %d is %#x: the output must be printable ASCII", file.Name, i, c)
		}
		require.NotContains(t, string(file.Data), "??/", file.Name)
	}
}

// Every golden case in every layout and variant, with the full toolchain
// matrix (TestGolden runs the registered runner's quick one). For the
// scikit-learn fixtures (sources in forest/sklearn_test.go), double C must
// also score every row within 1e-12 of scikit-learn 1.2.1's recorded
// predict_proba.
func TestCGoldenCasesFullMatrix(t *testing.T) {
	testenv.Need(t, cTools(testConfig.AllCompilers))
	cases, err := goldencase.Cases(goldenCases)
	require.NoError(t, err)
	r := testCRunner()
	r.Full = true
	sklearn := 0
	for _, c := range cases {
		if c.WantErr != "" || len(c.Flags.Runners) > 0 && !slices.Contains(c.Flags.Runners, r.Name()) {
			continue
		}
		if c.Sklearn != nil {
			sklearn++
		}
		for _, variant := range r.Variants() {
			for _, layout := range r.Layouts() {
				t.Run(c.Name+"/"+layout+"-"+variant, func(t *testing.T) {
					if c.Flags.Slow && testing.Short() {
						t.Skip("slow case: runs without -short")
					}
					t.Parallel()
					p, _, err := compile.Compile(c.Model, r.CompileOptions(variant))
					require.NoError(t, err)
					res, err := r.Score(context.Background(), p, layout, variant, c.Rows, t.TempDir())
					if variant == "float" && ctarget.FitsFloat(p) != nil {
						require.ErrorIs(t, err, ErrDeclined, "float C must decline what it cannot bound")
						return
					}
					require.NoError(t, err)
					want, wantCls := c.ReferenceFor(r, variant)
					exact, bound := r.Tolerance(variant, p)
					m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound)
					require.True(t, m.OK(), "%s", m)
					t.Logf("%s (bound %g)", m, bound)
					if c.Sklearn != nil && variant == "double" {
						c.CheckSklearn(t, res.Outputs, "emitted C "+layout)
					}
				})
			}
		}
	}
	require.GreaterOrEqual(t, sklearn, 2, "the scikit-learn fixtures sklearn-wine and sklearn-breast-cancer must be among the cases")
}

func TestCParseHexFloat(t *testing.T) {
	for s, want := range map[string]float64{"0x1.8p+1": 3, "-0x0p+0": math.Copysign(0, -1), "inf": math.Inf(1),
		"-inf": math.Inf(-1), "0x0.0000000000001p-1022": 5e-324, "0x1.fffffep+127": math.MaxFloat32} {
		got, err := parseHexFloat(s)
		require.NoError(t, err, s)
		require.Equal(t, math.Float64bits(want), math.Float64bits(got), s)
	}
	for _, s := range []string{"nan", "-nan"} {
		got, err := parseHexFloat(s)
		require.NoError(t, err)
		require.True(t, math.IsNaN(got), s)
	}
	_, err := parseHexFloat("0x1.zp+1")
	require.Error(t, err)
}

// A forest of about a million nodes (2,000 complete trees of depth 8, 20
// features, random thresholds and leaves) must build with the auto layout in under 60 s
// with gcc -O2, and score exactly. Slow: set SAWMILL_C_BIG=1 to run it.
func TestCMillionNodes(t *testing.T) {
	if os.Getenv("SAWMILL_C_BIG") == "" {
		t.Skip("slow: set SAWMILL_C_BIG=1 to build a 1M-node forest")
	}
	testenv.Need(t, cTools(testConfig.AllCompilers))
	const trees, depth, nf = 2000, 8, 20
	rng := rand.New(rand.NewPCG(7, 8))
	f := &forest.Forest{Task: forest.Classification, Classes: []string{"healthy", "cavitation"}, Combine: forest.Average}
	for j := 0; j < nf; j++ {
		f.Features = append(f.Features, fmt.Sprintf("f%d", j))
	}
	for ti := 0; ti < trees; ti++ {
		var tr forest.Tree
		n := 1<<(depth+1) - 1
		for i := 0; i < n; i++ {
			if i < n/2 {
				d := bits.Len(uint(i+1)) - 1 // the node's depth: one feature per level, so no split is dead
				tr.Feature = append(tr.Feature, (d+ti)%nf)
				tr.Threshold = append(tr.Threshold, rng.Float64())
				tr.Left, tr.Right = append(tr.Left, 2*i+1), append(tr.Right, 2*i+2)
				tr.MissingLeft = append(tr.MissingLeft, rng.IntN(2) == 0)
				tr.Value = append(tr.Value, 0, 0)
				continue
			}
			p := rng.Float64()
			tr.Feature, tr.Threshold = append(tr.Feature, -1), append(tr.Threshold, 0)
			tr.Left, tr.Right = append(tr.Left, -1), append(tr.Right, -1)
			tr.MissingLeft = append(tr.MissingLeft, false)
			tr.Value = append(tr.Value, 1-p, p)
		}
		f.Trees = append(f.Trees, tr)
	}
	mustValidate(t, f)
	rows := &forest.Rows{Features: f.Features}
	for r := 0; r < 2000; r++ {
		for j := 0; j < nf; j++ {
			v := rng.Float64()
			if rng.IntN(50) == 0 {
				v = math.NaN()
			}
			rows.Values = append(rows.Values, v)
		}
		rows.Line = append(rows.Line, r+2)
	}
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	require.GreaterOrEqual(t, p.NumNodes(), 1_000_000)
	layout, why, err := ctarget.Resolve(p, ctarget.Options{})
	require.NoError(t, err)
	res, err := testCRunner().score(context.Background(), p, ctarget.Options{Name: cName, Layout: emit.Auto}, rows, t.TempDir(), cMatrix[:1], false)
	require.NoError(t, err)
	t.Logf("%d nodes: auto chose %s (%s); gcc -O2 build %v, %d rows in %v", p.NumNodes(), layout, why, res.Build.Round(time.Millisecond), rows.Len(), res.Run.Round(time.Millisecond))
	require.Less(t, res.Build, 60*time.Second)
	want, wantCls := cReference(f, rows, false)
	m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, true, 0)
	require.True(t, m.OK(), "%s", m)
}

// TestCBuildsOneCompiler: with one C compiler on the machine, every build of
// every matrix is done with it (the sanitizer build only by clang, else
// dropped), so C is verified with any one of gcc, clang and cc.
func TestCBuildsOneCompiler(t *testing.T) {
	testenv.Need(t, cTools(testConfig.AllCompilers))
	saved := cToolsOnce.version
	defer func() { cToolsOnce.version = saved }()
	for _, only := range []string{"gcc", "clang", "cc"} {
		cToolsOnce.version = map[string]string{only: only + " 1.0"}
		for _, m := range [][]cBuild{cQuickMatrix, cMatrix, cBigMatrix} {
			got := cBuilds(m)
			require.NotEmpty(t, got)
			for _, b := range got {
				require.Equal(t, only, b.cc, "%v", got)
				require.False(t, b.sanitize && only != "clang" && only != "gcc", "sanitizer build with %s", only)
			}
		}
	}
	cToolsOnce.version = map[string]string{"gcc": "g", "clang": "c"}
	require.Equal(t, cMatrix, cBuilds(cMatrix), "both compilers: the full matrix unchanged")
}
