package ctarget

import (
	"fmt"
	"math"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
)

// nested writes one static function per tree and predict calling them in
// tree order. With one output a tree function returns its leaf value; with
// several it returns a row of NAME_leaf, the table of distinct leaf vectors.
//
//	static double model_tree0(const double *x)
//	{
//		if (x[3] <= 0.5) { /* node 0 */
//			return 0.25; /* node 1 */
//		} else {
//			...
//		}
//	}
func (g *gen) nested(w *printer) {
	p := g.p
	k := p.NumOutputs
	g.writeSets(w)
	var rows *leafRows
	if g.anyFullTree() && k > 1 {
		rows = g.distinctLeaves()
		w.line("static const %s %s_leaf[%d][%s_NUM_OUTPUTS] = {", g.at, g.name, len(rows.vecs), g.upper)
		for i, v := range rows.vecs {
			w.line("\t{%s}%s", g.joinLits(v), comma(i, len(rows.vecs)))
		}
		w.line("};")
		w.line("")
		g.tables = append(g.tables, Table{Name: g.name + "_leaf", What: "distinct leaf vectors", Len: len(rows.vecs) * k, ElemBytes: g.elemBytes()})
		w.line("static void %s_add(%s *acc, const %s *v)", g.name, g.at, g.at)
		w.line("{")
		w.line("\tint j;")
		w.line("\tfor (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("\t\tacc[j] += v[j];")
		w.line("\t}")
		w.line("}")
		w.line("")
	}
	for ti := range p.Trees {
		t := &p.Trees[ti]
		depth := t.Depth()
		if g.comments || ti == 0 {
			w.line("/* tree %d: %d nodes, depth %d%s */", t.Source, len(t.Nodes), depth, g.outputNote(ti))
		}
		if k == 1 || g.scalarTree(ti) {
			w.line("static %s %s_tree%d(const %s *x)", g.at, g.name, ti, g.ft)
		} else {
			w.line("static const %s *%s_tree%d(const %s *x)", g.at, g.name, ti, g.ft)
		}
		w.line("{")
		w.in()
		if len(t.Nodes) == 1 {
			w.line("(void)x;")
		}
		tr := rows
		if g.scalarTree(ti) {
			tr = nil
		}
		if depth > MaxNesting {
			g.treeGoto(w, ti, tr)
		} else {
			g.treeIf(w, ti, tr)
		}
		w.out()
		w.line("}")
		w.line("")
	}
	g.predictStart(w)
	for ti := range p.Trees {
		switch {
		case g.scalarTree(ti):
			w.line("acc[%d] += %s_tree%d(x);", p.Trees[ti].Output, g.name, ti)
		case k == 1:
			w.line("acc[0] += %s_tree%d(x);", g.name, ti)
		default:
			w.line("%s_add(acc, %s_tree%d(x));", g.name, g.name, ti)
		}
	}
}

// scalarTree reports whether tree ti adds one value to one output of
// several (a tree of one output, format 2's trees[].output).
func (g *gen) scalarTree(ti int) bool {
	return g.p.Trees[ti].HasOutput && g.p.NumOutputs > 1
}

// anyFullTree reports whether some tree adds a vector to every output.
func (g *gen) anyFullTree() bool {
	for ti := range g.p.Trees {
		if !g.scalarTree(ti) {
			return true
		}
	}
	return false
}

// outputNote says which output a tree of one output adds to.
func (g *gen) outputNote(ti int) string {
	if !g.scalarTree(ti) {
		return ""
	}
	return fmt.Sprintf(", adds to out[%d] only", g.p.Trees[ti].Output)
}

// treeIf writes tree ti as nested if/else, with an explicit stack.
func (g *gen) treeIf(w *printer, ti int, rows *leafRows) {
	t := &g.p.Trees[ti]
	const (
		open   = iota // write the node
		orElse        // "} else {"
		closed        // "}"
	)
	type item struct {
		node int32
		step int
	}
	stack := []item{{0, open}}
	for len(stack) > 0 {
		it := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		switch it.step {
		case orElse:
			w.out()
			w.line("} else {")
			w.in()
			continue
		case closed:
			w.out()
			w.line("}")
			continue
		}
		n := &t.Nodes[it.node]
		if n.IsLeaf() {
			w.line("return %s;%s", g.leafExpr(ti, it.node, rows), g.nodeComment(n))
			continue
		}
		w.line("if (%s) {%s", g.goesLeft(n), g.nodeComment(n))
		w.in()
		stack = append(stack, item{-1, closed}, item{n.Right, open}, item{-1, orElse}, item{n.Left, open})
	}
}

// treeGoto writes tree ti flat, for trees too deep to nest: nodes in
// preorder, each split jumping to its right child and falling through to its
// left child, which comes next.
//
//	if (!(x[3] <= 0.5)) goto n7; /* node 0 */
//	...
//	n7: return 0.25;
func (g *gen) treeGoto(w *printer, ti int, rows *leafRows) {
	t := &g.p.Trees[ti]
	isRight := make([]bool, len(t.Nodes))
	for i := range t.Nodes {
		if n := &t.Nodes[i]; !n.IsLeaf() {
			isRight[n.Right] = true
		}
	}
	stack := []int32{0}
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		n := &t.Nodes[i]
		label := ""
		if isRight[i] {
			label = fmt.Sprintf("n%d: ", i)
		}
		if n.IsLeaf() {
			w.line("%sreturn %s;%s", label, g.leafExpr(ti, i, rows), g.nodeComment(n))
			continue
		}
		w.line("%sif (%s) goto n%d;%s", label, g.goesRight(n), n.Right, g.nodeComment(n))
		stack = append(stack, n.Right, n.Left)
	}
}

func (g *gen) nodeComment(n *compile.Node) string {
	if !g.comments {
		return ""
	}
	return fmt.Sprintf(" /* node %d */", n.ID)
}

// goesLeft is the condition under which a row goes left at split n. A
// numeric split without other missing values is the comparison when
// missing values go right (NaN fails it) and its negated complement when
// they go left (NaN fails the complement); a set split and the missing
// bands are spelled out.
func (g *gen) goesLeft(n *compile.Node) string {
	x := fmt.Sprintf("x[%d]", n.Feature)
	var left string // the test that sends x left, NaN going where n says
	if n.IsSetSplit() {
		left = g.member(n, x)
		if n.MissingLeft {
			left = x + " != " + x + " || " + left
		}
	} else {
		t := g.lit(n.Threshold)
		switch {
		case n.Op == compile.LE && !n.MissingLeft:
			left = x + " <= " + t
		case n.Op == compile.LE:
			left = "!(" + x + " > " + t + ")"
		case !n.MissingLeft:
			left = x + " < " + t
		default:
			left = "!(" + x + " >= " + t + ")"
		}
	}
	e := g.extraMissing(n, x)
	switch {
	case e == "":
		return left
	case n.MissingLeft:
		return e + " || " + paren(left)
	}
	return "!" + e + " && " + paren(left)
}

// goesRight is the negation of goesLeft.
func (g *gen) goesRight(n *compile.Node) string {
	if n.IsSetSplit() || g.extraMissing(n, "x") != "" {
		return "!(" + g.goesLeft(n) + ")"
	}
	x := fmt.Sprintf("x[%d]", n.Feature)
	t := g.lit(n.Threshold)
	switch {
	case n.Op == compile.LE && !n.MissingLeft:
		return "!(" + x + " <= " + t + ")"
	case n.Op == compile.LE:
		return x + " > " + t
	case !n.MissingLeft:
		return "!(" + x + " < " + t + ")"
	default:
		return x + " >= " + t
	}
}

// paren wraps a condition holding a top-level || or && in parentheses.
func paren(c string) string {
	if strings.Contains(c, "||") || strings.Contains(c, "&&") {
		return "(" + c + ")"
	}
	return c
}

func (g *gen) leafExpr(ti int, ni int32, rows *leafRows) string {
	v := g.leaves[ti][ni]
	if rows == nil {
		return g.alit(v[0])
	}
	return fmt.Sprintf("%s_leaf[%d]", g.name, rows.row(v))
}

func (g *gen) joinLits(v []float64) string {
	s := ""
	for i, x := range v {
		if i > 0 {
			s += ", "
		}
		s += g.alit(x)
	}
	return s
}

func (g *gen) elemBytes() int {
	if g.at == "float" {
		return 4
	}
	return 8
}

// leafRows is the table of distinct leaf vectors (as the target computes
// with them), in order of first appearance; vectors are equal when their
// bits are, so -0 and 0 stay apart.
type leafRows struct {
	vecs  [][]float64
	index map[string]int
}

func (r *leafRows) row(v []float64) int {
	i, ok := r.index[vecKey(v)]
	if !ok {
		panic("BUG: ctarget: leaf vector not in the table")
	}
	return i
}

func vecKey(v []float64) string {
	b := make([]byte, 0, 8*len(v))
	for _, x := range v {
		u := math.Float64bits(x)
		b = append(b, byte(u), byte(u>>8), byte(u>>16), byte(u>>24), byte(u>>32), byte(u>>40), byte(u>>48), byte(u>>56))
	}
	return string(b)
}

func (g *gen) distinctLeaves() *leafRows { return g.distinctLeavesOf(false) }

// distinctLeavesOf is distinctLeaves over the trees of one output (scalar)
// or over the others.
func (g *gen) distinctLeavesOf(scalar bool) *leafRows {
	r := &leafRows{index: map[string]int{}}
	for ti := range g.p.Trees {
		if g.scalarTree(ti) != scalar {
			continue
		}
		for ni := range g.p.Trees[ti].Nodes {
			v := g.leaves[ti][ni]
			if v == nil {
				continue
			}
			key := vecKey(v)
			if _, ok := r.index[key]; !ok {
				r.index[key] = len(r.vecs)
				r.vecs = append(r.vecs, v)
			}
		}
	}
	return r
}
