package ctarget

import (
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

func TestCommentIsSafe(t *testing.T) {
	for _, s := range []string{"end */ here", "/* open", "??/", "???/", "a?" + "?=b", `back\`, "line\nbreak", "naïve", "*/*/", "//", "\x00\x7f\xff"} {
		c := comment(s)
		for i := 0; i < len(c); i++ {
			require.True(t, c[i] >= 0x20 && c[i] < 0x7f, "%q -> %q: byte %d is not printable ASCII", s, c, i)
		}
		require.NotContains(t, c, "*/", s)
		require.NotContains(t, c, "/*", s)
		require.NotContains(t, c, "??", s)
	}
	require.Equal(t, `na\303\257ve`, comment("naïve"))
}

// unquoteC reads back a string literal as a C compiler would (C99 6.4.4.4:
// simple escapes and octal escapes of up to three digits).
func unquoteC(t *testing.T, lit string) string {
	require.True(t, len(lit) >= 2 && lit[0] == '"' && lit[len(lit)-1] == '"', lit)
	s := lit[1 : len(lit)-1]
	var b []byte
	for i := 0; i < len(s); i++ {
		c := s[i]
		require.NotEqual(t, byte('"'), c, "unescaped quote in %s", lit)
		if c == '?' {
			require.False(t, i+1 < len(s) && s[i+1] == '?', "a trigraph can start at %d in %s", i, lit)
		}
		if c != '\\' {
			b = append(b, c)
			continue
		}
		i++
		switch {
		case s[i] >= '0' && s[i] <= '7':
			j := i
			for j < len(s) && j < i+3 && s[j] >= '0' && s[j] <= '7' {
				j++
			}
			v, err := strconv.ParseUint(s[i:j], 8, 8)
			require.NoError(t, err)
			b = append(b, byte(v))
			i = j - 1
		case strings.IndexByte(`"\?`, s[i]) >= 0:
			b = append(b, s[i])
		default:
			t.Fatalf("unexpected escape \\%c in %s", s[i], lit)
		}
	}
	return string(b)
}

func TestCStringRoundTrips(t *testing.T) {
	for _, s := range []string{"plain", `quo"te`, `back\slash`, "??/", "???=", "tab\tnew\nline", "naïve température", "\x001", "\xff7", "ends with \\"} {
		lit := cString(s)
		require.Equal(t, s, unquoteC(t, lit), lit)
		for i := 0; i < len(lit); i++ {
			require.True(t, lit[i] >= 0x20 && lit[i] < 0x7f, "%q: byte %d", lit, i)
		}
	}
}

func TestCheckName(t *testing.T) {
	for _, ok := range []string{"model", "pump_health", "Pump2", "e", "is_ok", "mem", "x"} {
		require.NoError(t, CheckName(ok), ok)
	}
	for _, bad := range []string{"", "_model", "2model", "pump__health", "pump-health", "naïve", "err", "isok", "strength", "int8", "memo", "Ex", "toy", "LC_ALL", "SIGx"} {
		err := CheckName(bad)
		require.Error(t, err, bad)
		require.Contains(t, err.Error(), "hint:", bad)
	}
}

func TestLiterals(t *testing.T) {
	require.Equal(t, "-0.0", doubleLit(math.Copysign(0, -1)))
	require.Equal(t, "0.0", doubleLit(0))
	require.Equal(t, "1e+300", doubleLit(1e300))
	require.Equal(t, "5e-324", doubleLit(5e-324))
	require.Equal(t, "0.1", doubleLit(0.1))
	require.Equal(t, "0.1f", floatLit(float64(float32(0.1))))
	require.Equal(t, "-0.0f", floatLit(math.Copysign(0, -1)))
	require.Equal(t, "3.4028235e+38f", floatLit(math.MaxFloat32))
	require.Panics(t, func() { floatLit(0.1) }, "0.1 is not a float value")
	require.Panics(t, func() { doubleLit(math.Inf(1)) })
}

// pumpForest is a small invented classifier (the pump-health monitor).
func pumpForest(t *testing.T, precision forest.Precision) *forest.Forest {
	f := &forest.Forest{
		Task:           forest.Classification,
		Features:       []string{"vibration_rms", "bearing_temp_c", "motor_current_a", "flow_m3h", "suction_pressure_kpa"},
		Classes:        []string{"healthy", "cavitation", "bearing_wear", "misalignment"},
		InputPrecision: precision,
		Combine:        forest.Average,
		Transform:      forest.NoTransform,
		BaseScore:      []float64{0, 0, 0, 0},
		Trees: []forest.Tree{{
			Feature:     []int{1, 0, -1, -1, -1},
			Threshold:   []float64{61.5, 0.1, 0, 0, 0},
			Left:        []int{1, 3, -1, -1, -1},
			Right:       []int{2, 4, -1, -1, -1},
			MissingLeft: []bool{false, true, false, false, false},
			Value:       []float64{0, 0, 0, 0, 0.1, 0.2, 0.3, 0.4, 0.9, 0.1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1},
		}, {
			Feature:     []int{3, -1, -1},
			Threshold:   []float64{12.25, 0, 0},
			Left:        []int{1, -1, -1},
			Right:       []int{2, -1, -1},
			MissingLeft: []bool{true, false, false},
			Value:       []float64{0, 0, 0, 0, 0, 1, 0, 0, 0.5, 0, 0, 0.5},
		}},
	}
	require.NoError(t, f.Validate("pump.json"))
	return f
}

func compiled(t *testing.T, f *forest.Forest, single bool) *compile.Program {
	p, _, err := compile.Compile(f, compile.Options{SingleInputs: single})
	require.NoError(t, err)
	return p
}

func TestEmitIsDeterministicAndNamed(t *testing.T) {
	p := compiled(t, pumpForest(t, forest.Float64), false)
	ps := compiled(t, pumpForest(t, forest.Float64), true)
	for _, layout := range []string{emit.Auto, emit.Nested, emit.Table} {
		for _, fl := range []bool{false, true} {
			prog := p
			if fl {
				prog = ps
			}
			o := Options{Name: "pump_health", Layout: layout, Float: fl, Version: "test"}
			a, err := Emit(prog, o)
			require.NoError(t, err)
			b, err := Emit(prog, o)
			require.NoError(t, err)
			require.Equal(t, a, b, "emitting twice must give the same bytes")
			require.Len(t, a, 2)
			require.Equal(t, "pump_health.h", a[0].Name)
			require.Equal(t, "pump_health.c", a[1].Name)
			h := string(a[0].Data)
			require.Contains(t, h, p.Hash)
			require.Contains(t, h, "sawmill test")
			for _, f := range a {
				require.Contains(t, string(f.Data), emit.Ownership, "%s says the code is the user's", f.Name)
			}
			require.Contains(t, h, "#define PUMP_HEALTH_NUM_FEATURES 5")
			require.Contains(t, h, "#define PUMP_HEALTH_NUM_OUTPUTS 4")
			require.Contains(t, h, "#define PUMP_HEALTH_F_SUCTION_PRESSURE_KPA 4")
			require.Contains(t, h, "#define PUMP_HEALTH_C_BEARING_WEAR 2")
			require.Contains(t, h, `extern "C"`)
			require.Contains(t, h, "x[2] motor_current_a")
			require.Contains(t, h, "2 bearing_wear")
			ft := "double"
			if fl {
				ft = "float"
			}
			require.Contains(t, h, "void pump_health_predict(const "+ft+" *x, "+ft+" *out);")
			require.Contains(t, h, "int pump_health_predict_class(const "+ft+" *x);")
			require.NotContains(t, string(a[1].Data), "math.h", "no transform, no math.h")
			require.NotContains(t, string(a[1].Data), "model_", "the name must reach every symbol")
		}
	}
}

func TestEmitRejects(t *testing.T) {
	f := pumpForest(t, forest.Float32)
	p := compile.Lower(f) // no passes: round32 comparisons
	_, err := Emit(p, Options{})
	require.ErrorContains(t, err, "BUG")

	_, err = Emit(compiled(t, f, false), Options{Float: true})
	require.ErrorContains(t, err, "SingleInputs")
	_, err = Emit(compiled(t, f, true), Options{})
	require.ErrorContains(t, err, "or emit the float build")
	_, err = Emit(compiled(t, f, false), Options{Layout: "sideways"})
	require.ErrorContains(t, err, `layout "sideways"`)
	_, err = Emit(compiled(t, f, false), Options{Name: "2fast"})
	require.ErrorContains(t, err, "hint:")

	big := pumpForest(t, forest.Float64)
	big.Trees[1].Value[4] = 1e300
	_, err = Emit(compiled(t, big, true), Options{Float: true})
	require.ErrorContains(t, err, "out of float range")
	require.ErrorContains(t, err, "tree 1, node 1")
}

func TestResolveAuto(t *testing.T) {
	p := compiled(t, pumpForest(t, forest.Float64), false)
	l, why, err := Resolve(p, Options{})
	require.NoError(t, err)
	require.Equal(t, emit.Nested, l, why)
	one := *p
	one.Trees = []compile.Tree{{Nodes: make([]compile.Node, 0, 2*AutoNestedTreeNodes)}}
	for len(one.Trees[0].Nodes) <= AutoNestedTreeNodes { // a chain, each split's left child a leaf
		i := int32(len(one.Trees[0].Nodes))
		one.Trees[0].Nodes = append(one.Trees[0].Nodes,
			compile.Node{Feature: 0, Threshold: float64(i), Left: i + 1, Right: i + 2},
			compile.Node{Feature: -1, Left: -1, Right: -1, Value: []float64{1, 0, 0, 0}})
	}
	one.Trees[0].Nodes = append(one.Trees[0].Nodes, compile.Node{Feature: -1, Left: -1, Right: -1, Value: []float64{0, 1, 0, 0}})
	require.NoError(t, compile.Check(&one))
	l, why, err = Resolve(&one, Options{})
	require.NoError(t, err)
	require.Equal(t, emit.Table, l, why)
	// Copy the trees until the forest passes the nested limit.
	for p.NumNodes() <= AutoNestedNodes {
		p.Trees = append(p.Trees, p.Trees...)
	}
	l, why, err = Resolve(p, Options{Layout: emit.Auto})
	require.NoError(t, err)
	sizes, err := Sizes(p, Options{})
	require.NoError(t, err)
	require.Len(t, sizes, 5) // no bitvector row: 16,385 trees, more than BitvectorMaxTrees; block and perfect rows
	want := emit.Table
	if sizes[2].TableBytes < sizes[1].TableBytes {
		want = emit.Binned
	}
	require.Equal(t, want, l, "%s (table %d bytes, binned %d)", why, sizes[1].TableBytes, sizes[2].TableBytes)
	// Set splits cannot be binned: auto keeps table, and so does asking for
	// binned, saying why.
	sp := compiled(t, setSplitForest(t), false)
	for sp.NumNodes() <= AutoNestedNodes {
		sp.Trees = append(sp.Trees, sp.Trees...)
	}
	l, why, err = Resolve(sp, Options{})
	require.NoError(t, err)
	require.Equal(t, emit.Table, l, why)
	l, why, err = Resolve(sp, Options{Layout: emit.Binned})
	require.NoError(t, err)
	require.Equal(t, emit.Table, l, why)
	require.Contains(t, why, "is a set split")
	files, err := Emit(sp, Options{Layout: emit.Binned})
	require.NoError(t, err)
	require.Contains(t, string(files[0].Data), "the table layout instead")
}

// The table layout of a two-class forest: the scikit-learn breast-cancer
// fixture (a RandomForestClassifier of scikit-learn 1.2.1 on the Breast
// Cancer Wisconsin (Diagnostic) data, Wolberg, Street and Mangasarian 1995;
// see forest/sklearn_test.go) must take at most 8 bytes per node, leaves
// included, in double and 4 in float.
func TestTableBytesPerNode(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join("..", "..", "golden", "testdata", "sklearn-breast-cancer", "model.json"))
	require.NoError(t, err)
	for _, fl := range []bool{false, true} {
		p := compiled(t, f, fl)
		sizes, err := Sizes(p, Options{Float: fl})
		require.NoError(t, err)
		require.Len(t, sizes, len(Layouts())-1) // no perfect row: depth 10 pads past perfectMaxGrowth
		tab := sizes[1]
		require.Equal(t, emit.Table, tab.Layout)
		limit := 8.0
		if fl {
			limit = 4
		}
		t.Logf("float %v: %d nodes, table layout %d bytes, %.2f bytes per node", fl, tab.Nodes, tab.TableBytes, tab.BytesPerNode())
		for _, tb := range tab.Tables {
			t.Logf("  %s: %d x %d", tb.Name, tb.Len, tb.ElemBytes)
		}
		require.LessOrEqual(t, tab.BytesPerNode(), limit)
		// The header states the same figure.
		files, err := Emit(p, Options{Layout: emit.Table, Float: fl})
		require.NoError(t, err)
		require.Contains(t, string(files[0].Data), "total "+strconv.Itoa(tab.TableBytes)+" bytes")
	}
}

// Every table word decodes back to the split it came from, walked the way
// the C loop walks it, in both leaf modes, against compile.Eval on the
// fixture's rows.
func TestTableWalkMatchesEval(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join("..", "..", "golden", "testdata", "sklearn-wine", "model.json"))
	require.NoError(t, err)
	rows, err := forest.ReadRowsFile(filepath.Join("..", "..", "golden", "testdata", "sklearn-wine", "rows.csv"), f.Features, forest.RowOptions{})
	require.NoError(t, err)
	p := compiled(t, f, false)
	for _, mode := range []int{1, 2, 3} {
		g, err := newGen(p, Options{Layout: emit.Table})
		require.NoError(t, err)
		g.tableMode = mode
		tl, err := g.buildTable()
		require.NoError(t, err)
		require.Equal(t, mode == 2, tl.inWord)
		require.Equal(t, mode == 3, tl.inline)
		require.True(t, tl.round32, "a float32 model's thresholds are stored as floats")
		k := p.NumOutputs
		want, got := make([]float64, k), make([]float64, k)
		mask := func(n int) uint64 { return 1<<n - 1 }
		for r := 0; r < rows.Len(); r++ {
			x := rows.Row(r)
			compile.Eval(p, x, want)
			clear(got)
			for ti := range p.Trees {
				i, l, row := tl.treeStart[ti], tl.treeStart[ti]+ti, max(tl.soleRow[ti], 0)
				for i < tl.treeStart[ti+1] {
					w := tl.words[i]
					fe := int(w & mask(tl.fBits))
					ix := int(w >> tl.tShift() & mask(tl.tBits))
					if tl.perFeat {
						ix += tl.thrBase[fe]
					}
					v, th := x[fe], tl.thr[ix]
					if tl.inline {
						th = tl.splitThr[i]
					}
					if tl.round32 {
						v = float64(float32(v))
					}
					p1 := int(w >> tl.p1Shift() & mask(tl.p1Bits))
					left := v <= th && (!tl.hasLT || w&tl.ltBit() == 0 || v < th) || tl.hasML && w&tl.mlBit() != 0 && math.IsNaN(v)
					if left {
						if w&tl.llBit() != 0 {
							row = p1
							break
						}
						i++
						continue
					}
					if w&tl.rlBit() != 0 {
						row = int(w >> tl.p2Shift() & mask(tl.p2Bits))
						l += p1 + 1
						break
					}
					if tl.inWord && w&tl.llBit() != 0 {
						p1 = 0
					}
					l += p1 + 1
					i += p1 + 1
				}
				if !tl.inWord {
					row = tl.leafOf[l]
				}
				for j := 0; j < k; j++ {
					got[j] += tl.leafRows.vecs[row][j]
				}
			}
			for j := range got {
				got[j] = got[j]/float64(len(p.Trees)) + p.BaseScore[j]
			}
			require.Equal(t, want, got, "mode %d, row %d", mode, r)
		}
	}
}

// setSplitForest is a 100-tree, depth-6 model of 20 features in which
// every other split tests a random set of the categories 0 to 63 (as a
// boosting library's categorical splits do), the rest numeric.
func setSplitForest(t testing.TB) *forest.Forest {
	rng := rand.New(rand.NewPCG(100, 6))
	const trees, depth, nf = 100, 6, 20
	f := &forest.Forest{Task: forest.Regression, Combine: forest.Sum, Transform: forest.NoTransform,
		InputPrecision: forest.Float64, BaseScore: []float64{0.5}}
	for j := 0; j < nf; j++ {
		f.Features = append(f.Features, fmt.Sprintf("f%d", j))
	}
	for ti := 0; ti < trees; ti++ {
		var tr forest.Tree
		n := 1<<(depth+1) - 1
		tr.Categories = make([][]int32, n)
		for i := 0; i < n; i++ {
			tr.MissingLeft = append(tr.MissingLeft, rng.IntN(2) == 0)
			if i < n/2 {
				tr.Feature = append(tr.Feature, rng.IntN(nf))
				tr.Left, tr.Right = append(tr.Left, 2*i+1), append(tr.Right, 2*i+2)
				tr.Value = append(tr.Value, 0)
				if i%2 == 0 {
					tr.Threshold = append(tr.Threshold, 0)
					cats := []int32{}
					for c := int32(0); c < 64; c++ {
						if rng.IntN(3) == 0 {
							cats = append(cats, c)
						}
					}
					tr.Categories[i] = cats
				} else {
					tr.Threshold = append(tr.Threshold, rng.Float64())
				}
				continue
			}
			tr.Feature, tr.Threshold = append(tr.Feature, -1), append(tr.Threshold, 0)
			tr.Left, tr.Right = append(tr.Left, -1), append(tr.Right, -1)
			tr.Value = append(tr.Value, float64(float32(rng.NormFloat64())))
		}
		f.Trees = append(f.Trees, tr)
	}
	require.NoError(t, f.Validate("sets.json"))
	return f
}

// The table layout of setSplitForest: each split a word, each distinct
// category list 12 bytes of descriptor and its bitset's two words; at
// most 12 bytes per node, leaves included (the test logs the figure).
func TestSetSplitBytesPerNode(t *testing.T) {
	p := compiled(t, setSplitForest(t), false)
	sizes, err := Sizes(p, Options{})
	require.NoError(t, err)
	for _, s := range sizes {
		t.Logf("%s: %d nodes, tables %d bytes, %.2f bytes per node", s.Layout, s.Nodes, s.TableBytes, s.BytesPerNode())
		for _, tb := range s.Tables {
			t.Logf("  %s: %d x %d", tb.Name, tb.Len, tb.ElemBytes)
		}
	}
	require.Equal(t, emit.Table, sizes[1].Layout)
	require.LessOrEqual(t, sizes[1].BytesPerNode(), 12.0)
}

// Under float32 accumulation the source refuses wider float evaluation
// and contraction, and the header says so and states the bound with
// another C library's expf; float C refuses a float64-accumulating model
// whose transform it cannot bound.
func TestFloat32AccumulationSource(t *testing.T) {
	f := pumpForest(t, forest.Float64)
	f.Accumulate, f.Transform, f.TransformScale = forest.Float32, forest.Softmax, 0.5
	for i := range f.Trees {
		for j, v := range f.Trees[i].Value {
			f.Trees[i].Value[j] = float64(float32(v))
		}
	}
	require.NoError(t, f.Validate("pump.json"))
	for _, layout := range []string{emit.Nested, emit.Table} {
		files, err := Emit(compiled(t, f, false), Options{Layout: layout})
		require.NoError(t, err)
		h, c := string(files[0].Data), string(files[1].Data)
		require.Contains(t, h, "accumulates in float32")
		require.Contains(t, h, "relative 2^-21")
		require.Contains(t, c, "#if !defined(FLT_EVAL_METHOD) || FLT_EVAL_METHOD != 0\n#error")
		require.Contains(t, c, "#pragma STDC FP_CONTRACT OFF")
		require.Contains(t, c, "volatile float z = 0.5f * acc[j];")
		require.Contains(t, c, "s += (double)acc[j];", "softmax sums its float exponentials in double")
		require.Contains(t, c, "float acc[MODEL_NUM_OUTPUTS];")
	}
	g := pumpForest(t, forest.Float64)
	g.Transform = forest.Normalize
	require.NoError(t, g.Validate("pump.json"))
	_, err := Emit(compiled(t, g, true), Options{Float: true})
	require.ErrorContains(t, err, "normalize")
	require.ErrorContains(t, err, "hint: emit double C")
	require.Error(t, FitsFloat(compiled(t, g, true)))
}

// A model whose only set splits list no category (a test for a missing
// value, as the PMML reader writes isMissing) gets no set tables and no
// NAME_member in nested code, which never calls it there (gcc's
// -Werror=unused-function failed the build); the table layout keeps them.
func TestEmptySetSplitNested(t *testing.T) {
	f := &forest.Forest{Task: forest.Regression, Combine: forest.Sum, Transform: forest.NoTransform,
		InputPrecision: forest.Float64, BaseScore: []float64{0}, Features: []string{"a"},
		CategoryMatch: forest.MatchExact,
		Trees: []forest.Tree{{
			Feature: []int{0, -1, -1}, Threshold: []float64{0, 0, 0}, Left: []int{1, -1, -1}, Right: []int{2, -1, -1},
			MissingLeft: []bool{true, false, false}, Value: []float64{0, 1, 2},
			Categories: [][]int32{{}, nil, nil},
		}}}
	require.NoError(t, f.Validate("m"))
	p := compiled(t, f, false)
	for _, layout := range []string{emit.Nested, emit.Table} {
		files, err := Emit(p, Options{Name: "m", Layout: layout})
		require.NoError(t, err)
		var src string
		for _, fl := range files {
			if strings.HasSuffix(fl.Name, ".c") {
				src = string(fl.Data)
			}
		}
		calls := strings.Count(src, "m_member(")
		if layout == emit.Nested {
			require.Zero(t, calls, "nested code defines or calls m_member:\n%s", src)
		} else {
			require.GreaterOrEqual(t, calls, 2, "the table layout defines and calls m_member")
		}
	}
}
