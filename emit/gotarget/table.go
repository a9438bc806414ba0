package gotarget

import (
	"encoding/base64"
	"encoding/binary"
	"fmt"
	"math"
	"strings"

	"github.com/dave/jennifer/jen"

	"github.com/sawmill-dev/sawmill/compile"
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
//
// The step is computed, not branched on: i += 1 + (far[i]-1)&-fail. A leaf
// tests xx[leafMark], the NaN in xx's last slot, and has far 0, so the walk
// stays put there; with one output thr holds the leaf's value, with several
// its row in leafValues. That lets Predict walk eight trees in lockstep
// (four in forests deeper than laneDepth) until all stand on leaves: the
// dependency chains overlap, and the only branch left is the loop's.

// tableNode is a node of the table being built.
type tableNode struct {
	feat uint32  // index into xx; leafMark at a leaf
	thr  float64 // threshold; at a leaf its value, or its row in leaves
	far  uint32  // offset to the other child; 0 at a leaf
	tree int     // the tree in the model (compile.Tree.Source), for comments
	id   int32   // the node's id in the model's tree, for comments
	op   compile.Op
	set  uint32 // 1 + the set descriptor of a set split (see v2.go), else 0
}

// tableData is the whole forest in table form.
type tableData struct {
	nodes    []tableNode
	roots    []uint32
	leaves   []float64 // leaf rows back to back, several outputs only
	negated  bool      // some split tests -x: xx holds x then -x
	variants int       // blocks of NumFeatures in xx: x; x, -x; or x, -x, xz, -xz
	sets     *setData  // descriptors of the set splits, nil when none
	width    int       // len(xx) - 1, the index of its NaN slot
	featType string    // narrowest unsigned type holding every feat and leafMark
	farType  string
}

// testFor rewrites split n as a test that succeeds (never for NaN) exactly
// when the row goes to the child returned first. A zero_missing split tests
// the blocks of xx that hold xz and -xz. A set split (set >= 0, its
// descriptor) tests membership, or, when missing values go left, being
// neither missing nor a member (the descriptor's negated form).
func testFor(n *compile.Node, nf int, sets *setData) (feat int, thr float64, first, second int32, set int) {
	down := math.Inf(-1)
	base := n.Feature
	if n.ZeroMissing {
		base += 2 * nf
	}
	switch {
	case n.IsSetSplit() && n.MissingLeft:
		return base, 0, n.Right, n.Left, sets.lookup(n, true)
	case n.IsSetSplit():
		return base, 0, n.Left, n.Right, sets.lookup(n, false)
	case !n.MissingLeft && n.Op == compile.LE: // x <= t
		return base, n.Threshold, n.Left, n.Right, -1
	case !n.MissingLeft: // x < t  ⇔  x <= prev(t)
		return base, math.Nextafter(n.Threshold, down), n.Left, n.Right, -1
	case n.Op == compile.LE: // right when x > t  ⇔  -x <= prev(-t)
		return nf + base, math.Nextafter(-n.Threshold, down), n.Right, n.Left, -1
	default: // right when x >= t  ⇔  -x <= -t
		return nf + base, -n.Threshold, n.Right, n.Left, -1
	}
}

// blocks is the number of NumFeatures-long blocks of xx: 1 (x), 2 (x and
// -x, when some numeric split sends missing values left) or 4 (x, -x, xz,
// -xz, when some split has zero_missing).
func blocks(p *compile.Program) int {
	switch {
	case zeroMissing(p):
		return 4
	case negates(p):
		return 2
	}
	return 1
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
	d := &tableData{negated: negates(p), variants: blocks(p), sets: buildSets(p, true)}
	d.width = d.variants * nf
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
				tn := tableNode{feat: uint32(d.width), tree: t.Source, id: n.ID}
				if p.NumOutputs == 1 || t.HasOutput {
					tn.thr = n.Value[0]
				} else {
					tn.thr = float64(leafRow)
					leafRow++
					d.leaves = append(d.leaves, n.Value...)
				}
				d.nodes = append(d.nodes, tn)
				continue
			}
			f, th, first, second, set := testFor(n, nf, d.sets)
			d.nodes = append(d.nodes, tableNode{feat: uint32(f), thr: th, tree: t.Source, id: n.ID, op: n.Op, set: uint32(set + 1)})
			stack = append(stack, item{second, at}, item{first, -1})
		}
	}
	if len(d.nodes) >= math.MaxUint32 {
		panic("BUG: golang: table of more than 2^32 nodes")
	}
	d.featType = narrowest(uint64(d.width))
	d.farType = narrowest(uint64(maxFar))
	return d
}

// negates reports whether some numeric split sends missing values left, so
// that the extended input must hold -x.
func negates(p *compile.Program) bool {
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			if n := &p.Trees[ti].Nodes[i]; !n.IsLeaf() && !n.IsSetSplit() && n.MissingLeft {
				return true
			}
		}
	}
	return false
}

// narrowest is the smallest unsigned type holding 0..n.
func narrowest(n uint64) string {
	switch {
	case n <= math.MaxUint8:
		return "uint8"
	case n <= math.MaxUint16:
		return "uint16"
	default:
		return "uint32"
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
	farDoc, thrDoc := "offset to the child taken when the test fails; 0 at a leaf", "threshold; the value at a leaf"
	if g.k > 1 {
		thrDoc = "threshold; at a leaf its row in leafValues"
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
	if d.sets != nil {
		typ := narrowest(uint64(len(d.sets.descs)))
		out = append(out, section{"nodeSet", typ, len(d.nodes), "1 + the set of a set split, else 0", func(bl *blob) {
			for _, n := range d.nodes {
				bl.uint(typ, n.set)
			}
		}})
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

// table declares the arrays, as readable literals or decoded from a blob
// (Options.Tables), and the descents.
func (g *gen) table() []jen.Code {
	d := g.tableData()
	doc := jen.Comment("The forest as one table (see step): nodes in depth-first order per tree, decoded").Line().
		Comment("once by init from blob.")
	if g.tables == TablesLiteral {
		doc = jen.Comment("The forest as one table (see step): nodes in depth-first order per tree, one").Line().
			Comment("line each in nodes below.")
	}
	out := []jen.Code{
		doc.Line().Add(g.xxConsts(d.variants)),
		g.tableStep(d), g.tableLeafN(g.lanes()),
	}
	if t := g.tailLanes(); t != 0 && t != g.lanes() {
		out = append(out, g.tableLeafN(t))
	}
	if !g.v2 {
		out = append(out, g.tableRows(d)...)
	}
	switch {
	case g.v2:
		out = append(out, g.v2Decls()...)
		if g.perOut {
			out = append(out, g.addTreeFunc())
		}
	case g.k > 1:
		out = append(out, g.baseScoreVar(), g.addRow("leafValues"))
	}
	if g.tables == TablesLiteral {
		return append(out, g.literalDecls(d)...)
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

// xxConsts sizes the extended input:
//
//	const (
//		xxLen    = 2*NumFeatures + 1 // x, -x, NaN
//		leafMark = xxLen - 1
//	)
func (g *gen) xxConsts(variants int) jen.Code {
	size := jen.Id("NumFeatures").Op("+").Lit(1)
	doc := "x, then a NaN tested at every leaf"
	switch variants {
	case 2:
		size = jen.Lit(2).Op("*").Id("NumFeatures").Op("+").Lit(1)
		doc = "x, -x, then a NaN tested at every leaf"
	case 4:
		size = jen.Lit(4).Op("*").Id("NumFeatures").Op("+").Lit(1)
		doc = "x, -x, xz (the zero band made NaN), -xz, then a NaN tested at every leaf"
	}
	return jen.Const().Defs(
		jen.Id("xxLen").Op("=").Add(size).Comment(doc),
		jen.Id("leafMark").Op("=").Id("xxLen").Op("-").Lit(1).Comment("feat at a leaf"),
	)
}

// tableStep is one step of a walk:
//
//	func step(xx *[xxLen]float64, feat []uint8, far []uint16, thr []float64, i int) int {
//		fail := 1
//		if xx[feat[i]] <= thr[i] {
//			fail = 0
//		}
//		return i + 1 + (int(far[i])-1)&-fail
//	}
func (g *gen) tableStep(d *tableData) jen.Code {
	test := jen.If(jen.Id("xx").Index(jen.Id("feat").Index(jen.Id("i"))).Op("<=").Id("thr").Index(jen.Id("i"))).Block(jen.Id("fail").Op("=").Lit(0))
	doc := jen.Null()
	if d.sets != nil {
		// if s := nodeSet[i]; s != 0 { if setTest(int(s)-1, xx[feat[i]]) { fail = 0 } } else if … { fail = 0 }
		test = jen.If(jen.Id("s").Op(":=").Id("nodeSet").Index(jen.Id("i")), jen.Id("s").Op("!=").Lit(0)).Block(
			jen.If(jen.Id("setTest").Call(jen.Int().Parens(jen.Id("s")).Op("-").Lit(1), jen.Id("xx").Index(jen.Id("feat").Index(jen.Id("i"))))).Block(
				jen.Id("fail").Op("=").Lit(0),
			),
		).Else().Add(test)
		doc = jen.Comment("At a set split (nodeSet[i] != 0) the test is setTest's.").Line()
	}
	return jen.Comment("step moves from node i to the next node of the walk: i+1 when xx[feat[i]] <= thr[i],").Line().
		Comment("else (also when the value is NaN) i+far[i]. A leaf has far 0 and tests the NaN, so").Line().
		Comment("the walk stays on it.").Line().Add(doc).
		Func().Id("step").Params(jen.Id("xx").Op("*").Index(jen.Id("xxLen")).Float64(), jen.Id("feat").Index().Id(d.featType),
		jen.Id("far").Index().Id(d.farType), jen.Id("thr").Index().Float64(), jen.Id("i").Int()).Int().Block(
		jen.Id("fail").Op(":=").Lit(1),
		test,
		jen.Return(jen.Id("i").Op("+").Lit(1).Op("+").Parens(jen.Int().Parens(jen.Id("far").Index(jen.Id("i"))).Op("-").Lit(1)).Op("&").Op("-").Id("fail")),
	)
}

// tableLeaf walks one tree:
//
//	func leaf(xx *[xxLen]float64, i int) int {
//		feat, far, thr := feat, far, thr
//		for feat[i] != leafMark {
//			i = step(xx, feat, far, thr, i)
//		}
//		return i
//	}
func (g *gen) tableLeaf() jen.Code {
	return jen.Comment("leaf walks one tree from node i to its leaf.").Line().
		Func().Id("leaf").Params(jen.Id("xx").Op("*").Index(jen.Id("xxLen")).Float64(), jen.Id("i").Int()).Int().Block(
		jen.List(jen.Id("feat"), jen.Id("far"), jen.Id("thr")).Op(":=").List(jen.Id("feat"), jen.Id("far"), jen.Id("thr")),
		jen.For(jen.Id("feat").Index(jen.Id("i")).Op("!=").Id("leafMark")).Block(
			jen.Id("i").Op("=").Id("step").Call(jen.Id("xx"), jen.Id("feat"), jen.Id("far"), jen.Id("thr"), jen.Id("i")),
		),
		jen.Return(jen.Id("i")),
	)
}

// laneDepth is the deepest forest whose table walk takes eight trees in
// lockstep; deeper forests take four. BenchmarkLayouts (thread CPU time, best
// of 25, one process): on 125 depth-8 trees the eight-lane walk took 10 to
// 15% less time than four lanes, on 12 fully grown trees (depth 34) 20 to
// 40% more, since a lockstep group runs until its longest path ends.
const laneDepth = 12

// lanes is the number of trees the table walk takes in lockstep.
func (g *gen) lanes() int {
	if g.o.lanes != 0 {
		return g.o.lanes
	}
	if g.p.MaxDepth() <= laneDepth {
		return 8
	}
	return 4
}

// laneIDs names the walks of one lockstep group.
var laneIDs = []string{"a", "b", "c", "d", "e", "f", "g", "h"}

// leafFunc is the name of the lockstep walk of the given width.
func leafFunc(width int) string { return fmt.Sprintf("leaf%d", width) }

// tailLanes is the width of the walk that takes the last trees, the
// remainder of numTrees over lanes (0 when none): four where at most four
// trees remain of an eight-lane walk, so that one left-over tree does not
// cost a walk of eight.
func (g *gen) tailLanes() int {
	rem := len(g.p.Trees) % g.lanes()
	switch {
	case rem == 0:
		return 0
	case rem <= 4:
		return 4
	}
	return g.lanes()
}

// tableLeafN walks four (or eight, see lanes) trees in lockstep:
//
//	func leaf4(xx *[xxLen]float64, a, b, c, d int) (int, int, int, int) {
//		feat, far, thr := feat, far, thr
//		for (int(feat[a])^leafMark)|(int(feat[b])^leafMark)|… != 0 {
//			a = step(xx, feat, far, thr, a)
//			…
//		}
//		return a, b, c, d
//	}
func (g *gen) tableLeafN(width int) jen.Code {
	ids := laneIDs[:width]
	var cond *jen.Statement
	var steps, params, rets, results []jen.Code
	for _, id := range ids {
		t := jen.Parens(jen.Int().Parens(jen.Id("feat").Index(jen.Id(id))).Op("^").Id("leafMark"))
		if cond == nil {
			cond = t
		} else {
			cond = cond.Op("|").Add(t)
		}
		steps = append(steps, jen.Id(id).Op("=").Id("step").Call(jen.Id("xx"), jen.Id("feat"), jen.Id("far"), jen.Id("thr"), jen.Id(id)))
		params = append(params, jen.Id(id))
		rets = append(rets, jen.Id(id))
		results = append(results, jen.Int())
	}
	return jen.Comment(fmt.Sprintf("%s walks %d trees at once, from nodes %s, until all stand on their", leafFunc(width), len(ids), strings.Join(ids, ", "))).Line().
		Comment("leaves: the walks do not wait on each other.").Line().
		Func().Id(leafFunc(width)).Params(jen.Id("xx").Op("*").Index(jen.Id("xxLen")).Float64(), jen.List(params...).Int()).Params(results...).Block(
		jen.List(jen.Id("feat"), jen.Id("far"), jen.Id("thr")).Op(":=").List(jen.Id("feat"), jen.Id("far"), jen.Id("thr")),
		jen.For(cond.Op("!=").Lit(0)).Block(steps...),
		jen.Return(rets...),
	)
}

// extendInput makes xx:
//
//	var xx [xxLen]float64
//	for j, v := range x {
//		xx[j], xx[NumFeatures+j] = v, -v   // or xx[j] = v
//	}
//	xx[leafMark] = math.NaN()
func (g *gen) extendInput(variants int) []jen.Code {
	out := g.inputPrep(false)
	out = append(out, jen.Var().Id("xx").Index(jen.Id("xxLen")).Float64())
	return append(out, extendFill(g.fillValue(variants))...)
}

// fillValue are the statements that put value v of feature j into xx.
func (g *gen) fillValue(variants int) []jen.Code {
	fill := []jen.Code{jen.Id("xx").Index(jen.Id("j")).Op("=").Id("v")}
	if variants >= 2 {
		fill = []jen.Code{jen.List(jen.Id("xx").Index(jen.Id("j")), jen.Id("xx").Index(jen.Id("NumFeatures").Op("+").Id("j"))).
			Op("=").List(jen.Id("v"), jen.Op("-").Id("v"))}
	}
	if variants == 4 {
		// z := v; if -Z <= v && v <= Z { z = NaN }; xx[2*NumFeatures+j], xx[3*NumFeatures+j] = z, -z
		fill = append(fill,
			jen.Id("z").Op(":=").Id("v"),
			jen.If(g.inZeroBand(jen.Id("v"))).Block(jen.Id("z").Op("=").Qual("math", "NaN").Call()),
			jen.List(jen.Id("xx").Index(jen.Lit(2).Op("*").Id("NumFeatures").Op("+").Id("j")),
				jen.Id("xx").Index(jen.Lit(3).Op("*").Id("NumFeatures").Op("+").Id("j"))).
				Op("=").List(jen.Id("z"), jen.Op("-").Id("z")),
		)
	}
	return fill
}

// extendFill fills xx from x, fill being the statements for one value v at
// j, and sets the NaN every leaf tests.
func extendFill(fill []jen.Code) []jen.Code {
	return []jen.Code{
		jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("x")).Block(fill...),
		jen.Id("xx").Index(jen.Id("leafMark")).Op("=").Qual("math", "NaN").Call(),
	}
}

// tablePredictBody walks the trees four (or eight, see lanes) at a time and
// adds their leaves in tree order:
//
//	r := roots
//	for ; len(r) >= 4; r = r[4:] {
//		a, b, c, d := leaf4(&xx, int(r[0]), int(r[1]), int(r[2]), int(r[3]))
//		s += thr[a]
//		…
//	}
//	a, b, _, _ := leaf4(&xx, int(r[0]), int(r[1]), int(r[1]), int(r[1]))  // the last T%4 trees
//	s += thr[a]
//	s += thr[b]
func (g *gen) tablePredictBody() []jen.Code {
	body := g.extendInput(g.tableData().variants)
	lanes := g.lanes()
	tree := 0 // the tree add is called for, counted for the v2 form
	add := func(leaf jen.Code) jen.Code {
		tree++
		switch {
		case g.v2:
			return g.addV2(jen.Id("t").Op("+").Lit((tree-1)%lanes), -1, jen.Id("thr").Index(leaf))
		case g.k == 1:
			return jen.Id("s").Op("+=").Id("thr").Index(leaf)
		}
		return jen.Id("addLeaf").Call(jen.Op("&").Id("acc"), jen.Int().Parens(jen.Id("thr").Index(leaf)))
	}
	ids := laneIDs[:lanes]
	group := []jen.Code{laneCall(jen.Op("&").Id("xx"), "r", lanes, lanes)}
	for _, id := range ids {
		group = append(group, add(jen.Id(id)))
	}
	walk := []jen.Code{
		jen.Id("r").Op(":=").Id("roots"),
		jen.For(jen.Empty(), jen.Len(jen.Id("r")).Op(">=").Lit(lanes), jen.Id("r").Op("=").Id("r").Index(jen.Lit(lanes).Op(":"))).Block(group...),
	}
	if g.v2 && g.perOut { // the tree index t goes along with r
		walk = []jen.Code{
			jen.List(jen.Id("r"), jen.Id("t")).Op(":=").List(jen.Id("roots"), jen.Lit(0)),
			jen.For(jen.Empty(), jen.Len(jen.Id("r")).Op(">=").Lit(lanes), jen.List(jen.Id("r"), jen.Id("t")).Op("=").
				List(jen.Id("r").Index(jen.Lit(lanes).Op(":")), jen.Id("t").Op("+").Lit(lanes))).Block(group...),
		}
	}
	// The last trees go through a walk of tailLanes, the last root
	// repeated in the unused places.
	if rem := len(g.p.Trees) % lanes; rem > 0 {
		walk = append(walk, laneCall(jen.Op("&").Id("xx"), "r", g.tailLanes(), rem))
		for i := range rem {
			walk = append(walk, add(jen.Id(ids[i])))
		}
	}
	switch {
	case g.v2:
		body = append(body, g.startV2())
		body = append(body, walk...)
		return append(body, g.finishV2()...)
	case g.k == 1:
		body = append(body, g.scalarStart())
		body = append(body, walk...)
		return append(body, g.scalarFinish()...)
	}
	body = append(body, g.vectorStart())
	body = append(body, walk...)
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
