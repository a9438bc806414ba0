package golang

import (
	"encoding/base64"
	"encoding/binary"
	"fmt"
	"math"
	"strings"

	"github.com/dave/jennifer/jen"

	"sawmill/compile"
)

// The table layout keeps the forest as flat arrays walked by one loop. The
// arrays travel in the source as one base64 blob of little-endian numbers,
// split into lines, and init decodes them once: the Go compiler builds a
// string in seconds at any size, where array literals cost it about 2.4 GB
// per million nodes.
//
// Nodes are laid out per tree in depth-first order, with the child a test
// sends a row to on success placed right after its parent, so one test
// serves every split:
//
//	xx[feat[i]] <= thr[i]  →  i+1,  else (and for NaN)  →  i+far[i]
//
// A split that sends missing values right tests x as given. One that sends
// them left puts its right child next and tests the negated input, which
// xx holds after x: x > t is -x < -t, and -x < u is -x <= the float below u.
// At a leaf feat is leafMark; with one output thr holds the leaf value,
// with several far holds the leaf's row in leafValues. The descent is
// branch-free apart from the leaf test: the step is computed, not jumped.

// tableNode is a node of the table being built.
type tableNode struct {
	feat uint32 // index into xx, or leafMark
	thr  float64
	far  uint32 // offset to the other child; at a leaf with several outputs, the leaf row
}

// tableData is the whole forest in table form.
type tableData struct {
	nodes    []tableNode
	roots    []uint32
	leaves   []float64 // leaf rows back to back, several outputs only
	negated  bool      // some split tests -x: xx holds x then -x
	width    int       // len(xx)
	featType string    // narrowest unsigned type holding every feat and leafMark
	farType  string
	leafMark uint32
}

// testFor rewrites split n as a test that succeeds (never for NaN) exactly
// when the row goes to the child returned first.
func testFor(n *compile.Node, nf int) (feat int, thr float64, first, second int32) {
	down := math.Inf(-1)
	switch {
	case !n.MissingLeft && n.Op == compile.LE: // x <= t
		return n.Feature, n.Threshold, n.Left, n.Right
	case !n.MissingLeft: // x < t  ⇔  x <= prev(t)
		return n.Feature, math.Nextafter(n.Threshold, down), n.Left, n.Right
	case n.Op == compile.LE: // right when x > t  ⇔  -x <= prev(-t)
		return nf + n.Feature, math.Nextafter(-n.Threshold, down), n.Right, n.Left
	default: // right when x >= t  ⇔  -x <= -t
		return nf + n.Feature, -n.Threshold, n.Right, n.Left
	}
}

// buildTable lays out the given trees (all when nil) in table form.
func buildTable(p *compile.Program, trees []int) *tableData {
	nf := len(p.Features)
	if trees == nil {
		trees = make([]int, len(p.Trees))
		for i := range trees {
			trees[i] = i
		}
	}
	d := &tableData{width: nf, negated: negates(p)}
	if d.negated {
		d.width = 2 * nf
	}
	leafRow := uint32(0)
	maxFar := uint32(0)
	for _, ti := range trees {
		t := &p.Trees[ti]
		d.roots = append(d.roots, uint32(len(d.nodes)))
		type item struct {
			node   int32
			parent int // table index of the parent whose far child this is, or -1
		}
		stack := []item{{0, -1}}
		for len(stack) > 0 {
			it := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			at := len(d.nodes)
			if it.parent >= 0 {
				off := uint32(at - it.parent)
				d.nodes[it.parent].far = off
				maxFar = max(maxFar, off)
			}
			n := &t.Nodes[it.node]
			if n.IsLeaf() {
				tn := tableNode{feat: math.MaxUint32}
				if p.NumOutputs == 1 {
					tn.thr = n.Value[0]
				} else {
					tn.far = leafRow
					leafRow++
					d.leaves = append(d.leaves, n.Value...)
				}
				d.nodes = append(d.nodes, tn)
				continue
			}
			f, th, first, second := testFor(n, nf)
			d.nodes = append(d.nodes, tableNode{feat: uint32(f), thr: th})
			stack = append(stack, item{second, at}, item{first, -1})
		}
	}
	if len(d.nodes) >= math.MaxUint32 {
		panic("BUG: golang: table of more than 2^32 nodes")
	}
	d.featType, d.leafMark = narrowest(uint64(d.width))
	for i := range d.nodes {
		if d.nodes[i].feat == math.MaxUint32 {
			d.nodes[i].feat = d.leafMark
		}
	}
	d.farType, _ = narrowest(uint64(max(maxFar, leafRow)))
	return d
}

// negates reports whether some split sends missing values left, so that
// the extended input must hold -x.
func negates(p *compile.Program) bool {
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			if n := &p.Trees[ti].Nodes[i]; !n.IsLeaf() && n.MissingLeft {
				return true
			}
		}
	}
	return false
}

// narrowest is the smallest unsigned type holding 0..n, and its maximum
// value, which is above n and free to mark leaves.
func narrowest(n uint64) (string, uint32) {
	switch {
	case n < math.MaxUint8:
		return "uint8", math.MaxUint8
	case n < math.MaxUint16:
		return "uint16", math.MaxUint16
	default:
		return "uint32", math.MaxUint32
	}
}

func typeSize(t string) int {
	switch t {
	case "uint8":
		return 1
	case "uint16":
		return 2
	case "uint32":
		return 4
	}
	return 8
}

// blob is a little-endian byte stream, then base64 in lines.
type blob struct{ b []byte }

func (bl *blob) uint(t string, v uint32) {
	switch t {
	case "uint8":
		bl.b = append(bl.b, byte(v))
	case "uint16":
		bl.b = binary.LittleEndian.AppendUint16(bl.b, uint16(v))
	default:
		bl.b = binary.LittleEndian.AppendUint32(bl.b, v)
	}
}

func (bl *blob) float(v float64) {
	bl.b = binary.LittleEndian.AppendUint64(bl.b, math.Float64bits(v))
}

// blobLine is the length of one line of the base64 text.
const blobLine = 2000

// lines is the blob as the elements of a string array:
//
//	var blob = [...]string{
//		"AQID…",
//		…
//	}
func (bl *blob) decl(name string) jen.Code {
	text := base64.StdEncoding.EncodeToString(bl.b)
	var items []jen.Code
	for len(text) > 0 {
		n := min(blobLine, len(text))
		items = append(items, jen.Line().Lit(text[:n]))
		text = text[n:]
	}
	items = append(items, jen.Line())
	return jen.Var().Id(name).Op("=").Index(jen.Op("...")).String().Values(items...)
}

// section is one array carried in the blob.
type section struct {
	name, typ string // variable and element type
	n         int    // elements
	doc       string
	write     func(*blob)
}

// blobDecls declares the arrays of sections, the init that decodes them
// from one blob, the decoders and the blob itself:
//
//	var (
//		feat []uint8 // …
//		…
//	)
//
//	func init() {
//		b, err := base64.StdEncoding.DecodeString(strings.Join(blob[:], ""))
//		…
//		feat, b = decodeUint8(b, 1234)
//		…
//	}
func (g *gen) blobDecls(sections []section) []jen.Code {
	var bl blob
	var vars, decode []jen.Code
	var types, names []string
	decode = append(decode,
		jen.List(jen.Id("b"), jen.Err()).Op(":=").Qual("encoding/base64", "StdEncoding").Dot("DecodeString").
			Call(jen.Qual("strings", "Join").Call(jen.Id("blob").Index(jen.Op(":")), jen.Lit(""))),
		nil, // the length check, once the size is known
	)
	for i, sc := range sections {
		sc.write(&bl)
		vars = append(vars, jen.Id(sc.name).Index().Id(sc.typ).Comment(sc.doc))
		rest := jen.Id("b")
		if i == len(sections)-1 {
			rest = jen.Id("_")
		}
		decode = append(decode, jen.List(jen.Id(sc.name), rest).Op("=").Id(decoderName(sc.typ)).Call(jen.Id("b"), jen.Lit(sc.n)))
		types = append(types, sc.typ)
		names = append(names, sc.name)
	}
	decode[1] = jen.If(jen.Err().Op("!=").Nil().Op("||").Len(jen.Id("b")).Op("!=").Lit(len(bl.b))).Block(
		jen.Panic(jen.Lit(g.pkg + ": the forest's tables do not decode")),
	)
	out := []jen.Code{
		jen.Var().Defs(vars...),
		jen.Func().Id("init").Params().Block(decode...),
	}
	out = append(out, decoders(types...)...)
	return append(out, jen.Comment(fmt.Sprintf("blob holds %s in order, little-endian, base64-encoded.", strings.Join(names, ", "))).Line().
		Add(bl.decl("blob")))
}

// tableSections are the arrays of the table layout.
func (g *gen) tableSections(d *tableData) []section {
	farDoc, thrDoc := "offset to the child taken when the test fails", "threshold; the value at a leaf"
	if g.k > 1 {
		farDoc, thrDoc = "offset to the child taken when the test fails; the row in leafValues at a leaf", "threshold"
	}
	out := []section{
		{"feat", d.featType, len(d.nodes), "index into xx tested at each node; leafMark at a leaf", func(bl *blob) {
			for _, n := range d.nodes {
				bl.uint(d.featType, n.feat)
			}
		}},
		{"far", d.farType, len(d.nodes), farDoc, func(bl *blob) {
			for _, n := range d.nodes {
				bl.uint(d.farType, n.far)
			}
		}},
		{"thr", "float64", len(d.nodes), thrDoc, func(bl *blob) {
			for _, n := range d.nodes {
				bl.float(n.thr)
			}
		}},
		{"roots", "uint32", len(d.roots), "first node of each tree", func(bl *blob) {
			for _, r := range d.roots {
				bl.uint("uint32", r)
			}
		}},
	}
	if g.k > 1 {
		out = append(out, section{"leafValues", "float64", len(d.leaves), "leaf vectors, NumOutputs values each", func(bl *blob) {
			for _, v := range d.leaves {
				bl.float(v)
			}
		}})
	}
	return out
}

// table declares the arrays, their decoding and the descent.
func (g *gen) table() []jen.Code {
	d := g.tableData()
	out := []jen.Code{
		jen.Comment("The forest as one table (see the descent in leaf): nodes in depth-first order per").Line().
			Comment("tree, decoded once by init from blob.").Line().
			Const().Id("leafMark").Op("=").Lit(int(d.leafMark)),
		g.tableLeaf(d),
	}
	if g.k > 1 {
		out = append(out, g.baseScoreVar(), g.addRow("leafValues"))
	}
	return append(out, g.blobDecls(g.tableSections(d))...)
}

func (g *gen) tableData() *tableData {
	if g.tab == nil {
		g.tab = buildTable(g.p, nil)
	}
	return g.tab
}

// addRow adds one leaf row of a flat table to the accumulator:
//
//	func addLeaf(acc *[NumOutputs]float64, r int) {
//		v := leafValues[r*NumOutputs:][:NumOutputs]
//		for j := range acc {
//			acc[j] += v[j]
//		}
//	}
func (g *gen) addRow(table string) jen.Code {
	return jen.Comment("addLeaf adds leaf row r to acc.").Line().
		Func().Id("addLeaf").Params(jen.Id("acc").Op("*").Index(jen.Id("NumOutputs")).Float64(), jen.Id("r").Int()).Block(
		jen.Id("v").Op(":=").Id(table).Index(jen.Id("r").Op("*").Id("NumOutputs").Op(":")).Index(jen.Op(":").Id("NumOutputs")),
		jen.For(jen.Id("j").Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("+=").Id("v").Index(jen.Id("j")),
		),
	)
}

// tableLeaf is the descent:
//
//	func leaf(xx *[NumFeatures]float64, i int) int {
//		feat, far, thr := feat, far, thr
//		for {
//			f := feat[i]
//			if f == leafMark {
//				return i
//			}
//			fail := 1
//			if xx[f] <= thr[i] {
//				fail = 0
//			}
//			i += 1 + (int(far[i])-1)&-fail
//		}
//	}
func (g *gen) tableLeaf(d *tableData) jen.Code {
	return jen.Comment("leaf walks one tree from node i to its leaf. A failed test (NaN fails every test)").Line().
		Comment("goes to i+far[i], a passed one to i+1; the step is computed, not branched on.").Line().
		Func().Id("leaf").Params(jen.Id("xx").Op("*").Index(g.xxLen(d)).Float64(), jen.Id("i").Int()).Int().Block(
		jen.List(jen.Id("feat"), jen.Id("far"), jen.Id("thr")).Op(":=").List(jen.Id("feat"), jen.Id("far"), jen.Id("thr")),
		jen.For().Block(
			jen.Id("f").Op(":=").Id("feat").Index(jen.Id("i")),
			jen.If(jen.Id("f").Op("==").Id("leafMark")).Block(jen.Return(jen.Id("i"))),
			jen.Id("fail").Op(":=").Lit(1),
			jen.If(jen.Id("xx").Index(jen.Id("f")).Op("<=").Id("thr").Index(jen.Id("i"))).Block(jen.Id("fail").Op("=").Lit(0)),
			jen.Id("i").Op("+=").Lit(1).Op("+").Parens(jen.Int().Parens(jen.Id("far").Index(jen.Id("i"))).Op("-").Lit(1)).Op("&").Op("-").Id("fail"),
		),
	)
}

// xxLen is the length of the extended input: x, then -x when some split
// sends missing values left.
func (g *gen) xxLen(d *tableData) jen.Code {
	if d.negated {
		return jen.Lit(2).Op("*").Id("NumFeatures")
	}
	return jen.Id("NumFeatures")
}

// extendInput makes xx:
//
//	var xx [2 * NumFeatures]float64
//	for j, v := range x {
//		xx[j], xx[NumFeatures+j] = v, -v
//	}
//
// or, when no split needs -x, xx := x.
func (g *gen) extendInput(negated bool) []jen.Code {
	if !negated {
		return []jen.Code{jen.Id("xx").Op(":=").Id("x")}
	}
	return []jen.Code{
		jen.Var().Id("xx").Index(jen.Lit(2).Op("*").Id("NumFeatures")).Float64(),
		jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("x")).Block(
			jen.List(jen.Id("xx").Index(jen.Id("j")), jen.Id("xx").Index(jen.Id("NumFeatures").Op("+").Id("j"))).
				Op("=").List(jen.Id("v"), jen.Op("-").Id("v")),
		),
	}
}

// tablePredictBody walks every tree:
//
//	xx := x
//	s := 0.0
//	for _, r := range roots {
//		s += thr[leaf(xx, int(r))]
//	}
func (g *gen) tablePredictBody() []jen.Code {
	d := g.tableData()
	body := g.extendInput(d.negated)
	xx := jen.Id("xx")
	if d.negated {
		xx = jen.Op("&").Id("xx")
	}
	walk := jen.Id("leaf").Call(xx, jen.Int().Parens(jen.Id("r")))
	if g.k == 1 {
		body = append(body, g.scalarStart(),
			jen.For(jen.List(jen.Id("_"), jen.Id("r")).Op(":=").Range().Id("roots")).Block(
				jen.Id("s").Op("+=").Id("thr").Index(walk),
			))
		return append(body, g.scalarFinish()...)
	}
	body = append(body, g.vectorStart(),
		jen.For(jen.List(jen.Id("_"), jen.Id("r")).Op(":=").Range().Id("roots")).Block(
			jen.Id("addLeaf").Call(jen.Op("&").Id("acc"), jen.Int().Parens(jen.Id("far").Index(walk))),
		))
	return append(body, g.vectorFinish()...)
}

func decoderName(t string) string { return "decode" + strings.ToUpper(t[:1]) + t[1:] }

// decoders declares one decoding helper per type used:
//
//	func decodeUint16(b []byte, n int) ([]uint16, []byte) {
//		v := make([]uint16, n)
//		for i := range v {
//			v[i] = binary.LittleEndian.Uint16(b[2*i:])
//		}
//		return v, b[2*n:]
//	}
func decoders(types ...string) []jen.Code {
	seen := map[string]bool{}
	var out []jen.Code
	for _, t := range types {
		if seen[t] {
			continue
		}
		seen[t] = true
		size := typeSize(t)
		var elem jen.Code
		switch t {
		case "uint8":
			out = append(out, jen.Func().Id(decoderName(t)).Params(jen.Id("b").Index().Byte(), jen.Id("n").Int()).
				Params(jen.Index().Uint8(), jen.Index().Byte()).Block(
				jen.Return(jen.Id("b").Index(jen.Op(":").Id("n").Op(":").Id("n")), jen.Id("b").Index(jen.Id("n").Op(":"))),
			))
			continue
		case "uint16":
			elem = jen.Qual("encoding/binary", "LittleEndian").Dot("Uint16").Call(jen.Id("b").Index(jen.Lit(2).Op("*").Id("i").Op(":")))
		case "uint32":
			elem = jen.Qual("encoding/binary", "LittleEndian").Dot("Uint32").Call(jen.Id("b").Index(jen.Lit(4).Op("*").Id("i").Op(":")))
		case "float64":
			elem = jen.Qual("math", "Float64frombits").Call(jen.Qual("encoding/binary", "LittleEndian").Dot("Uint64").
				Call(jen.Id("b").Index(jen.Lit(8).Op("*").Id("i").Op(":"))))
		default:
			panic("BUG: golang: no decoder for " + t)
		}
		out = append(out, jen.Func().Id(decoderName(t)).Params(jen.Id("b").Index().Byte(), jen.Id("n").Int()).
			Params(jen.Index().Id(t), jen.Index().Byte()).Block(
			jen.Id("v").Op(":=").Make(jen.Index().Id(t), jen.Id("n")),
			jen.For(jen.Id("i").Op(":=").Range().Id("v")).Block(jen.Id("v").Index(jen.Id("i")).Op("=").Add(elem)),
			jen.Return(jen.Id("v"), jen.Id("b").Index(jen.Lit(size).Op("*").Id("n").Op(":"))),
		))
	}
	return out
}
