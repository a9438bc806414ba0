package gotarget

import (
	"bytes"
	"fmt"
	"math"

	"github.com/dave/jennifer/jen"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// testRow is one row checked by the emitted model_test.go, with the outputs
// compile.Eval (held equal to the interpreter by the compiler's tests) gives.
type testRow struct {
	note  string
	x     []float64
	want  []float64
	class int
}

// testSource is model_test.go:
//
//	var testRows = []struct {
//		note  string
//		x     [NumFeatures]uint64
//		want  [NumOutputs]uint64
//		class int
//	}{
//		{"tree 0, node 5", [NumFeatures]uint64{0x3fe0000000000000, …}, […]uint64{…}, 1},
//	}
//
//	func TestPredict(t *testing.T) { … compares math.Float64bits … }
//
// Inputs and outputs are float64 bit patterns, so -0, NaN, infinities and
// the last bit of every output are checked exactly.
func (g *gen) testSource() ([]byte, error) {
	rows := g.testRows()
	f := jen.NewFile(g.pkg)
	f.HeaderComment(g.generatedLine())
	f.HeaderComment(emit.Ownership)
	cls := g.p.IsClassifier()
	fields := []jen.Code{
		jen.Id("note").String(),
		jen.Id("x").Index(jen.Id("NumFeatures")).Uint64(),
		jen.Id("want").Index(jen.Id("NumOutputs")).Uint64(),
	}
	if cls {
		fields = append(fields, jen.Id("class").Int())
	}
	items := make([]jen.Code, 0, len(rows)+1)
	for _, r := range rows {
		vals := []jen.Code{jen.Lit(r.note), bitsArray("NumFeatures", r.x), bitsArray("NumOutputs", r.want)}
		if cls {
			vals = append(vals, jen.Lit(r.class))
		}
		items = append(items, jen.Line().Values(vals...))
	}
	items = append(items, jen.Line())
	f.Comment("testRows reach chosen leaves of the model (rows built from the path's")
	f.Comment("comparisons), with the outputs sawmill's reference evaluation gave them when")
	f.Comment("this package was generated, as float64 bit patterns.")
	f.Var().Id("testRows").Op("=").Index().Struct(fields...).Values(items...)
	f.Line()

	check := []jen.Code{
		jen.Var().Id("x").Index(jen.Id("NumFeatures")).Float64(),
		jen.For(jen.List(jen.Id("j"), jen.Id("b")).Op(":=").Range().Id("r").Dot("x")).Block(
			jen.Id("x").Index(jen.Id("j")).Op("=").Qual("math", "Float64frombits").Call(jen.Id("b")),
		),
		jen.Id("got").Op(":=").Id("Predict").Call(jen.Op("&").Id("x")),
		jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("got")).Block(
			jen.If(jen.Qual("math", "Float64bits").Call(jen.Id("v")).Op("!=").Id("r").Dot("want").Index(jen.Id("j"))).Block(
				jen.Id("t").Dot("Errorf").Call(jen.Lit("%s: output %d is %v (%#016x), want %v (%#016x)"),
					jen.Id("r").Dot("note"), jen.Id("j"), jen.Id("v"), jen.Qual("math", "Float64bits").Call(jen.Id("v")),
					jen.Qual("math", "Float64frombits").Call(jen.Id("r").Dot("want").Index(jen.Id("j"))),
					jen.Id("r").Dot("want").Index(jen.Id("j"))),
			),
		),
	}
	if cls {
		check = append(check, jen.If(jen.Id("c").Op(":=").Id("PredictClass").Call(jen.Op("&").Id("x")), jen.Id("c").Op("!=").Id("r").Dot("class")).Block(
			jen.Id("t").Dot("Errorf").Call(jen.Lit("%s: class %d, want %d"), jen.Id("r").Dot("note"), jen.Id("c"), jen.Id("r").Dot("class")),
		))
	}
	f.Comment("TestPredict holds Predict to the recorded outputs bit for bit.")
	f.Func().Id("TestPredict").Params(jen.Id("t").Op("*").Qual("testing", "T")).Block(
		jen.For(jen.List(jen.Id("_"), jen.Id("r")).Op(":=").Range().Id("testRows")).Block(check...),
	)
	var buf bytes.Buffer
	if err := f.Render(&buf); err != nil {
		return nil, fmt.Errorf("BUG: golang: generated test does not format: %v", err)
	}
	return buf.Bytes(), nil
}

// bitsArray is [size]uint64{0x…, …}.
func bitsArray(size string, v []float64) jen.Code {
	vals := make([]jen.Code, len(v))
	for i, x := range v {
		vals[i] = jen.Id(fmt.Sprintf("%#016x", math.Float64bits(x)))
	}
	return jen.Index(jen.Id(size)).Uint64().Values(vals...)
}

// testRows builds the rows model_test.go checks: one reaching each of up
// to MaxTestRows leaves spread over the forest, a row of missing values,
// and the caller's sample rows.
func (g *gen) testRows() []testRow {
	p := g.p
	limit := g.o.MaxTestRows
	if limit == 0 {
		limit = 16
	}
	var rows []testRow
	add := func(note string, x []float64) {
		out := make([]float64, g.k)
		compile.Eval(p, x, out)
		r := testRow{note: note, x: x, want: out}
		if p.IsClassifier() {
			r.class = classOf(out)
		}
		rows = append(rows, r)
	}
	type leafRef struct{ tree, node int32 }
	var leaves []leafRef
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			if p.Trees[ti].Nodes[i].IsLeaf() {
				leaves = append(leaves, leafRef{int32(ti), int32(i)})
			}
		}
	}
	if limit > 0 {
		step := max(1, len(leaves)/limit)
		for i := 0; i < len(leaves) && len(rows) < limit; i += step {
			l := leaves[i]
			t := &p.Trees[l.tree]
			x, ok := rowReaching(p, t, l.node)
			if !ok {
				continue
			}
			add(fmt.Sprintf("tree %d, node %d", t.Source, t.Nodes[l.node].ID), x)
		}
		nan := make([]float64, len(p.Features))
		for j := range nan {
			nan[j] = math.NaN()
		}
		add("every value missing", nan)
	}
	for i, s := range g.o.Sample {
		add(fmt.Sprintf("sample row %d", i), append([]float64(nil), s...))
	}
	return rows
}

// classOf is forest.Forest.ClassOf for a classifier's outputs.
func classOf(out []float64) int {
	if len(out) == 1 {
		if out[0] > 0.5 {
			return 1
		}
		return 0
	}
	return forest.Argmax(out)
}

// bound is what a path says about one feature: lo < x (or lo <= x when
// loClosed) and x < hi (or x <= hi), and whether NaN takes the path.
type bound struct {
	lo, hi             float64
	loClosed, hiClosed bool
	nanOK              bool
}

func (b *bound) inside(v float64) bool {
	return (v > b.lo || b.loClosed && v == b.lo) && (v < b.hi || b.hiClosed && v == b.hi)
}

// pick is a value the bound admits, preferring a threshold itself (the
// edge case worth testing), then a value just inside, then NaN.
func (b *bound) pick() (float64, bool) {
	cands := []float64{}
	if b.hiClosed && !math.IsInf(b.hi, 0) {
		cands = append(cands, b.hi)
	}
	if b.loClosed && !math.IsInf(b.lo, 0) {
		cands = append(cands, b.lo)
	}
	if !math.IsInf(b.lo, 0) && !math.IsInf(b.hi, 0) {
		cands = append(cands, b.lo/2+b.hi/2)
	}
	if !math.IsInf(b.lo, 0) {
		cands = append(cands, math.Nextafter(b.lo, math.Inf(1)))
	}
	if !math.IsInf(b.hi, 0) {
		cands = append(cands, math.Nextafter(b.hi, math.Inf(-1)))
	}
	cands = append(cands, 0, b.lo, b.hi)
	for _, v := range cands {
		if b.inside(v) {
			return v, true
		}
	}
	if b.nanOK {
		return math.NaN(), true
	}
	return 0, false
}

// rowReaching builds a row that reaches leaf in t from the comparisons on
// its path (compile.LeafBox, comparisons only, as reached walks), and
// checks that it does.
func rowReaching(p *compile.Program, t *compile.Tree, leaf int32) ([]float64, bool) {
	box := compile.LeafBox(p, t, leaf, true)
	x := make([]float64, len(box))
	for f, in := range box {
		b := bound{lo: in.Lo, hi: in.Hi, loClosed: !in.LoOpen, hiClosed: !in.HiOpen, nanOK: in.NaN}
		v, ok := b.pick()
		if !ok {
			return nil, false
		}
		x[f] = v
	}
	if reached(t, x) != leaf {
		return nil, false
	}
	return x, true
}

// reached is the leaf x reaches in t.
func reached(t *compile.Tree, x []float64) int32 {
	i := int32(0)
	for {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			return i
		}
		v := x[n.Feature]
		switch {
		case v != v:
			if n.MissingLeft {
				i = n.Left
			} else {
				i = n.Right
			}
		case n.Op == compile.LE && v <= n.Threshold, n.Op == compile.LT && v < n.Threshold:
			i = n.Left
		default:
			i = n.Right
		}
	}
}
