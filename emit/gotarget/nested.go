package gotarget

import (
	"fmt"

	"github.com/dave/jennifer/jen"

	"github.com/sawmill-dev/sawmill/compile"
)

// The nested layout is one function per tree. Each split becomes an if whose
// body is the smaller subtree and which falls through to the larger one:
//
//	func tree0(x *[NumFeatures]float64) float64 {
//		// node 0: "vibration_rms"
//		if x[0] <= 0.41 {
//			return 0.25 // node 1
//		}
//		// node 2: "bearing_temp_c"
//		if x[1] > 61.5 {
//			…
//		}
//		return -1 // node 3
//	}
//
// Nesting only the smaller child bounds the nesting depth by log2 of the tree
// size whatever the tree's depth, so a 100,000-deep chain is a flat run of
// ifs: the generator's recursion, gofmt and the Go compiler stay shallow.
// With one output a tree returns its leaf value; with several it returns
// the leaf's row in the shared table leafValues, which Predict adds.

// nested declares the tree functions, and for several outputs the leaf
// table and base score.
func (g *gen) nested() []jen.Code {
	var out []jen.Code
	leaf := 0 // next row of leafValues
	var rows []jen.Code
	for ti := range g.p.Trees {
		t := &g.p.Trees[ti]
		out = append(out, g.treeFunc(ti, t, &leaf, &rows))
	}
	switch {
	case g.v2:
		out = append(out, g.v2Decls()...)
		if g.k > 1 && len(rows) > 0 {
			out = append(out, g.leafValuesVar(rows))
		}
	case g.k > 1:
		out = append(out, g.baseScoreVar(), g.leafTable(rows))
	}
	return out
}

// nestedPredictBody calls the trees in order:
//
//	s := 0.0
//	s += tree0(x)
//	…
//
// or, for several outputs, addLeaf(&acc, tree0(x)) per tree.
func (g *gen) nestedPredictBody() []jen.Code {
	if g.v2 {
		body := append(g.inputPrep(true), g.startV2())
		args := []jen.Code{jen.Id("x")}
		if g.zero {
			args = append(args, jen.Op("&").Id("xz"))
		}
		for ti := range g.p.Trees {
			body = append(body, g.addV2(nil, ti, jen.Id(treeName(ti)).Call(args...)))
		}
		return append(body, g.finishV2()...)
	}
	if g.k == 1 {
		body := []jen.Code{g.scalarStart()}
		for ti := range g.p.Trees {
			body = append(body, jen.Id("s").Op("+=").Id(treeName(ti)).Call(jen.Id("x")))
		}
		return append(body, g.scalarFinish()...)
	}
	body := []jen.Code{g.vectorStart()}
	for ti := range g.p.Trees {
		body = append(body, jen.Id("addLeaf").Call(jen.Op("&").Id("acc"), jen.Id(treeName(ti)).Call(jen.Id("x"))))
	}
	return append(body, g.vectorFinish()...)
}

func treeName(ti int) string { return fmt.Sprintf("tree%d", ti) }

// treeFunc is one tree:
//
//	// tree3 is model tree 3: 41 nodes, depth 6.
//	func tree3(x *[NumFeatures]float64) float64 { … }
func (g *gen) treeFunc(ti int, t *compile.Tree, leaf *int, rows *[]jen.Code) jen.Code {
	result := jen.Float64()
	if g.k > 1 && !t.HasOutput {
		result = jen.Int()
	}
	size := subtreeSizes(t)
	body := g.subtree(t, 0, size, leaf, rows)
	doc := fmt.Sprintf("%s is model tree %d: %d nodes, depth %d.", treeName(ti), t.Source, len(t.Nodes), t.Depth())
	if t.HasOutput && g.k > 1 {
		doc = fmt.Sprintf("%s is model tree %d, of output %d: %d nodes, depth %d.", treeName(ti), t.Source, t.Output, len(t.Nodes), t.Depth())
	}
	params := []jen.Code{jen.Id("x").Op("*").Index(jen.Id("NumFeatures")).Float64()}
	if g.zero {
		params = []jen.Code{jen.List(jen.Id("x"), jen.Id("xz")).Op("*").Index(jen.Id("NumFeatures")).Float64()}
	}
	return jen.Comment(doc).Line().
		Func().Id(treeName(ti)).Params(params...).Add(result).
		Block(body...)
}

// subtreeSizes counts the nodes under each node; preorder puts children
// after parents, so one backward sweep does it.
func subtreeSizes(t *compile.Tree) []int32 {
	size := make([]int32, len(t.Nodes))
	for i := len(t.Nodes) - 1; i >= 0; i-- {
		n := &t.Nodes[i]
		size[i] = 1
		if !n.IsLeaf() {
			size[i] += size[n.Left] + size[n.Right]
		}
	}
	return size
}

// subtree is the statements for the subtree at node i: an if per split on
// the way down the larger children, each holding the smaller child, and
// the final leaf's return. It recurses only into a child of at most half
// the size, so at most log2(len(t.Nodes)) deep.
func (g *gen) subtree(t *compile.Tree, i int32, size []int32, leaf *int, rows *[]jen.Code) []jen.Code {
	var out []jen.Code
	for {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			return append(out, g.leafReturn(n, leaf, rows))
		}
		if g.comments {
			out = append(out, jen.Comment(fmt.Sprintf("node %d: %s", n.ID, quoteName(g.p.Features[n.Feature].Name))))
		}
		nestLeft := size[n.Left] <= size[n.Right]
		inner, next := n.Left, n.Right
		if !nestLeft {
			inner, next = n.Right, n.Left
		}
		out = append(out, jen.If(g.goes(n, nestLeft)).Block(g.subtree(t, inner, size, leaf, rows)...))
		i = next
	}
}

// leafReturn ends a path:
//
//	return 0.25 // node 7
//
// or, for several outputs, the leaf's row in leafValues (return 12).
func (g *gen) leafReturn(n *compile.Node, leaf *int, rows *[]jen.Code) jen.Code {
	var ret *jen.Statement
	if len(n.Value) == 1 { // one output, or a tree of one output
		ret = jen.Return(g.float(n.Value[0]))
	} else {
		*rows = append(*rows, g.leafRow(n.Value))
		ret = jen.Return(jen.Lit(*leaf))
		*leaf++
	}
	if g.comments {
		ret.Comment(fmt.Sprintf("node %d", n.ID))
	}
	return ret
}

// goes is the condition under which split n sends the row left (or right).
// NaN fails every comparison, so the missing side needs no NaN test:
//
//	x[f] <= t      left, missing right     !(x[f] <= t)   right, missing right
//	!(x[f] > t)    left, missing left      x[f] > t       right, missing left
//
// and likewise with < and >= for strict splits.
//
// A zero_missing split tests xz, where the zero band is NaN. A set split
// tests member, which is false for NaN:
//
//	member(s, v)             left, missing right
//	v != v || member(s, v)   left, missing left
//	!member(s, v)            right, missing right
//	v == v && !member(s, v)  right, missing left
func (g *gen) goes(n *compile.Node, left bool) jen.Code {
	op, neg := "<=", ">"
	if n.Op == compile.LT {
		op, neg = "<", ">="
	}
	xs := "x"
	if n.ZeroMissing {
		xs = "xz"
	}
	xf := jen.Id(xs).Index(jen.Lit(n.Feature))
	if n.IsSetSplit() {
		mem := jen.Id("member").Call(jen.Lit(g.sets.lookup(n, false)), xf)
		switch {
		case left && !n.MissingLeft:
			return mem
		case left:
			return jen.Id(xs).Index(jen.Lit(n.Feature)).Op("!=").Add(xf.Clone()).Op("||").Add(mem)
		case !n.MissingLeft:
			return jen.Op("!").Add(mem)
		default:
			return jen.Id(xs).Index(jen.Lit(n.Feature)).Op("==").Add(xf.Clone()).Op("&&").Op("!").Add(mem)
		}
	}
	t := g.threshold(n.Threshold)
	switch {
	case left && !n.MissingLeft:
		return xf.Op(op).Add(t)
	case left && n.MissingLeft:
		return jen.Op("!").Parens(xf.Op(neg).Add(t))
	case !left && !n.MissingLeft:
		return jen.Op("!").Parens(xf.Op(op).Add(t))
	default:
		return xf.Op(neg).Add(t)
	}
}

// leafRow is one row of the leaf table: {0.1, 0.9, 0}.
func (g *gen) leafRow(v []float64) jen.Code {
	vals := make([]jen.Code, len(v))
	for j, x := range v {
		vals[j] = g.float(x)
	}
	return jen.Values(vals...)
}

// leafTable holds every leaf vector, and addLeaf adds one to the
// accumulator in output order:
//
//	var leafValues = [...][NumOutputs]float64{
//		{0.1, 0.9, 0},
//		…
//	}
//
//	func addLeaf(acc *[NumOutputs]float64, leaf int) {
//		v := &leafValues[leaf]
//		for j := range acc {
//			acc[j] += v[j]
//		}
//	}
func (g *gen) leafTable(rows []jen.Code) jen.Code {
	return g.leafValuesVar(rows).Line().Line().
		Comment("addLeaf adds leaf vector i to acc.").Line().
		Func().Id("addLeaf").Params(jen.Id("acc").Op("*").Index(jen.Id("NumOutputs")).Float64(), jen.Id("i").Int()).Block(
		jen.Id("v").Op(":=").Op("&").Id("leafValues").Index(jen.Id("i")),
		jen.For(jen.Id("j").Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("+=").Id("v").Index(jen.Id("j")),
		),
	)
}

// leafValuesVar is the table of leaf vectors:
//
//	var leafValues = [...][NumOutputs]float64{
//		{0.1, 0.9, 0},
//		…
//	}
func (g *gen) leafValuesVar(rows []jen.Code) *jen.Statement {
	items := make([]jen.Code, 0, len(rows)+1)
	for _, r := range rows {
		items = append(items, jen.Line().Add(r))
	}
	items = append(items, jen.Line())
	return jen.Comment("leafValues holds the leaf vectors the tree functions point to.").Line().
		Var().Id("leafValues").Op("=").Index(jen.Op("...")).Index(jen.Id("NumOutputs")).Float64().Values(items...)
}

// quoteName shows a feature name in a comment: Go-quoted, so no character
// of it can end the comment or the line.
func quoteName(s string) string { return fmt.Sprintf("%q", s) }
