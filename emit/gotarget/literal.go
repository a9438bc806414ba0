package gotarget

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/dave/jennifer/jen"
)

// Tables says how the table layout writes its arrays (Options.Tables).
const (
	// TablesAuto writes literals up to MaxLiteralNodes, base64 beyond.
	TablesAuto = "auto"
	// TablesLiteral writes typed array literals, one line per node with a
	// comment naming the tree, the node and its test: code a reviewer can
	// read and diff.
	TablesLiteral = "literal"
	// TablesBase64 writes one base64 blob that init decodes: the Go
	// compiler takes seconds over it at any size.
	TablesBase64 = "base64"
)

// MaxLiteralNodes is the largest forest whose table TablesAuto writes as
// literals. BenchmarkTableBuild measures go build against nodes (figures
// in its comment): literals cost about 30 µs of build CPU per node over
// the blob, which builds in a third of a second at any size, so 50,000
// nodes keep a literal table's build within about two seconds; past that
// the blob is the better trade.
const MaxLiteralNodes = 50_000

// chooseTables resolves Options.Tables for a forest of nodes nodes.
func chooseTables(tables string, nodes int) (string, error) {
	switch tables {
	case "", TablesAuto:
		if nodes <= MaxLiteralNodes {
			return TablesLiteral, nil
		}
		return TablesBase64, nil
	case TablesLiteral, TablesBase64:
		return tables, nil
	}
	return "", fmt.Errorf("unknown tables %q\nhint: use auto, literal or base64", tables)
}

// literalDecls declares the table as literals and the slices the walk
// reads, filled from them by init:
//
//	// nodes is the forest, one line per node: ...
//	var nodes = [...]tableNode{
//		{2, 4, 0.5},   // tree 0 node 0: "bearing_temp_c" <= 0.5, else +4
//		{6, 0, 0.25},  // tree 0 node 1: leaf
//		…
//	}
//
//	var roots = []uint32{0, 17, …}
//
//	var (
//		feat []uint8 // …
//		far  []uint16
//		thr  []float64
//	)
//
//	func init() { … copies nodes into feat, far and thr … }
func (g *gen) literalDecls(d *tableData) []jen.Code {
	nf := len(g.p.Features)
	var b strings.Builder
	b.WriteString("[...]tableNode{\n")
	tree := -1
	for i, n := range d.nodes {
		if n.tree != tree {
			tree = n.tree
			fmt.Fprintf(&b, "// tree %d\n", tree)
		}
		feat := strconv.Itoa(int(n.feat))
		what := "leaf"
		switch {
		case n.feat == uint32(d.width):
			feat = "leafMark"
			if g.k > 1 {
				what = fmt.Sprintf("leaf, row %d of leafValues", int(n.thr))
			}
		case int(n.feat) < nf:
			what = fmt.Sprintf("%s <= %s, else +%d", quoteName(g.p.Features[n.feat].Name), strconv.FormatFloat(n.thr, 'g', -1, 64), n.far)
		default:
			what = fmt.Sprintf("-%s <= %s, else +%d (missing goes left)", quoteName(g.p.Features[int(n.feat)-nf].Name), strconv.FormatFloat(n.thr, 'g', -1, 64), n.far)
		}
		fmt.Fprintf(&b, "{%s, %d, %s}, // %d: tree %d node %d: %s\n", feat, n.far, g.literalFloat(n.thr), i, n.tree, n.id, what)
	}
	b.WriteString("}")
	out := []jen.Code{
		jen.Comment("tableNode is one node of the table: the index into xx it tests (leafMark at a leaf),").Line().
			Comment("the offset to the node a failed test goes to (0 at a leaf) and the threshold (at a").Line().
			Comment("leaf its value, or with several outputs its row in leafValues).").Line().
			Type().Id("tableNode").Struct(
			jen.Id("feat").Id(d.featType),
			jen.Id("far").Id(d.farType),
			jen.Id("thr").Float64(),
		),
		jen.Comment("nodes is the forest, one line per node, each tree's nodes in depth-first order with").Line().
			Comment("the child a passed test goes to right after its node. A comment gives the node's").Line().
			Comment("position, its tree and id in the model, and its test: x <= t sends a row to the next").Line().
			Comment("line, else (and when the value is missing) to the line that far below; a test on").Line().
			Comment("-x is a split that sends missing values the other way.").Line().
			Var().Id("nodes").Op("=").Op(b.String()),
		jen.Comment("roots is the first node of each tree.").Line().
			Var().Id("roots").Op("=").Index().Uint32().Op(g.literalList(len(d.roots), 10, func(i int) string { return strconv.FormatUint(uint64(d.roots[i]), 10) })),
	}
	if g.k > 1 {
		out = append(out, jen.Comment("leafValues holds the leaf vectors, NumOutputs values each, one leaf a line.").Line().
			Var().Id("leafValues").Op("=").Index().Float64().Op(g.literalList(len(d.leaves), g.k, func(i int) string { return g.literalFloat(d.leaves[i]) })))
	}
	out = append(out,
		jen.Var().Defs(
			jen.Id("feat").Index().Id(d.featType).Comment("nodes' feat, the walk's first array"),
			jen.Id("far").Index().Id(d.farType).Comment("nodes' far"),
			jen.Id("thr").Index().Float64().Comment("nodes' thr"),
		),
		jen.Func().Id("init").Params().Block(
			jen.Id("feat").Op("=").Make(jen.Index().Id(d.featType), jen.Len(jen.Id("nodes"))),
			jen.Id("far").Op("=").Make(jen.Index().Id(d.farType), jen.Len(jen.Id("nodes"))),
			jen.Id("thr").Op("=").Make(jen.Index().Float64(), jen.Len(jen.Id("nodes"))),
			jen.For(jen.List(jen.Id("i"), jen.Id("n")).Op(":=").Range().Id("nodes")).Block(
				jen.List(jen.Id("feat").Index(jen.Id("i")), jen.Id("far").Index(jen.Id("i")), jen.Id("thr").Index(jen.Id("i"))).
					Op("=").List(jen.Id("n").Dot("feat"), jen.Id("n").Dot("far"), jen.Id("n").Dot("thr")),
			),
		),
	)
	return out
}

// literalList is a composite literal's braces and n items, perLine a line.
func (g *gen) literalList(n, perLine int, item func(i int) string) string {
	var b strings.Builder
	b.WriteString("{\n")
	for i := range n {
		b.WriteString(item(i))
		b.WriteByte(',')
		if (i+1)%perLine == 0 || i == n-1 {
			b.WriteByte('\n')
		} else {
			b.WriteByte(' ')
		}
	}
	b.WriteString("}")
	return b.String()
}

// literalFloat writes v as Go source, exactly: shortest round-trip digits,
// negZero for -0 and math.Inf for the infinities a threshold can become
// (the table layout imports math already, for the NaN at its leaves).
func (g *gen) literalFloat(v float64) string {
	switch {
	case math.IsNaN(v):
		panic("BUG: golang: NaN in a table")
	case math.IsInf(v, 1):
		return "math.Inf(1)"
	case math.IsInf(v, -1):
		return "math.Inf(-1)"
	}
	return fmt.Sprintf("%#v", g.float(v))
}
