package sqltarget

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// maxIndent caps indentation, so that a 300-deep tree does not spend most
// of its bytes on spaces.
const maxIndent = 24

func newline(b *strings.Builder, indent int) {
	b.WriteByte('\n')
	b.WriteString(strings.Repeat("  ", min(indent, maxIndent)))
}

// cond is the test that sends a row to the first branch written, and which
// child that is. A NULL makes every comparison unknown, and CASE takes the
// ELSE branch on unknown (ISO/IEC 9075, <case expression>), so a split
// whose missing values go right is written "x <= t" (left first) and one
// whose missing values go left is written "x > t" (right first). The other
// missing values (the missing band, zeros at a zero_missing split) are
// excluded from the first branch by a conjunct that is false for them and
// unknown for NULL, so they too go where NULL goes.
func (g *gen) cond(n *compile.Node) (test string, first, second int32) {
	x := featCol(n.Feature)
	var notMissing []string
	if g.p.HasMissingValue {
		notMissing = append(notMissing, g.outside(x, g.p.MissingLo, g.p.MissingHi))
	}
	if n.ZeroMissing {
		notMissing = append(notMissing, g.outside(x, -g.p.ZeroBound, g.p.ZeroBound))
	}
	join := func(t string) string {
		if len(notMissing) == 0 {
			return t
		}
		return strings.Join(notMissing, " AND ") + " AND " + t
	}
	if n.IsSetSplit() {
		in := g.member(x, n.Categories)
		if !n.MissingLeft {
			return join(in), n.Left, n.Right
		}
		return join("NOT " + in), n.Right, n.Left
	}
	t := g.d.num(n.Threshold)
	if g.unfactor {
		t = "coalesce(" + t + ", " + x + ")"
	}
	switch {
	case !n.MissingLeft && n.Op == compile.LE:
		return join(x + " <= " + t), n.Left, n.Right
	case !n.MissingLeft:
		return join(x + " < " + t), n.Left, n.Right
	case n.Op == compile.LE:
		return join(x + " > " + t), n.Right, n.Left
	default:
		return join(x + " >= " + t), n.Right, n.Left
	}
}

// outside is true when x is outside [lo, hi], unknown when x is NULL.
func (g *gen) outside(x string, lo, hi float64) string {
	if lo == hi {
		return x + " <> " + g.d.num(lo)
	}
	return "(" + x + " < " + g.d.num(lo) + " OR " + x + " > " + g.d.num(hi) + ")"
}

// member is true when x (not missing) is a member of the set split's
// categories under the program's category rule, unknown when x is NULL;
// with CategoryRound32 the rule sees round32(x). The categories are
// integer literals, compared with a double: exact below 2^31 in every
// engine.
//
//   - floor: FLOOR(x) IN (...). FLOOR of a double is a double in every
//     dialect and never raises an error (±Inf stay infinite, far from every
//     category); a negative x has a floor of at most -1, except −0, whose
//     floor −0 equals the category 0, as the format says. So no range test
//     is needed: FLOOR(x) = c exactly when c <= x < c+1.
//   - truncate: x > -1 AND FLOOR(ABS(x)) IN (...): for x >= 0 the floor,
//     and for -1 < x < 0 the category 0.
//   - exact: x IN (...).
//
// An empty list admits no value: x <> x, false for every value and unknown
// for NULL, like the tests above.
//
// IN lists rather than range tests: one IN list per split is what every
// engine prepares fastest for thousands of categories (SQLite builds one
// index for the list; PostgreSQL hashes lists of 9 or more constants;
// TestSQLSetSplit5000 scores a 5,000-category split in each engine, prepared in 2 to 60 ms).
func (g *gen) member(x string, cats []int32) string {
	if len(cats) == 0 {
		return "(" + x + " <> " + x + ")"
	}
	if g.p.CategoryRound32 {
		x = "(" + g.r32(x) + ")"
	}
	var b strings.Builder
	switch g.p.CategoryMatch {
	case forest.MatchExact:
		b.WriteString(x)
	case forest.MatchTruncate:
		b.WriteString("(" + x + " > " + g.d.num(-1) + " AND FLOOR(ABS(" + x + "))")
	default:
		b.WriteString("FLOOR(" + x + ")")
	}
	b.WriteString(" IN (")
	for i, c := range cats {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Itoa(int(c)))
	}
	b.WriteString(")")
	if g.p.CategoryMatch == forest.MatchTruncate {
		b.WriteString(")")
	}
	return b.String()
}

// writeTree writes the subtree of tree ti under root as a nested CASE. A
// leaf, or a split at depth cut (when cut >= 0), is written as code(node).
// The first line starts where b is; later lines are indented from indent.
// It walks with an explicit stack, so any depth is fine; nothing trails the
// last line.
func (g *gen) writeTree(b *strings.Builder, ti int, root, cut int32, code func(int32) string, indent int) {
	t := &g.p.Trees[ti]
	depth := g.depth[ti]
	terminal := func(i int32) bool { return t.Nodes[i].IsLeaf() || cut >= 0 && depth[i] == cut }
	comment := func(i int32) string {
		if !g.comments {
			return ""
		}
		if t.Nodes[i].IsLeaf() {
			return fmt.Sprintf(" -- leaf %d", t.Nodes[i].ID)
		}
		return fmt.Sprintf(" -- to node %d", t.Nodes[i].ID)
	}
	if terminal(root) {
		b.WriteString(code(root))
		return
	}
	type frame struct {
		node   int32
		indent int
		state  uint8 // 0: write the CASE line; 1: write ELSE; 2: write END
	}
	stack := []frame{{root, indent, 0}}
	startLine := false // whether the next write starts a new line
	for len(stack) > 0 {
		f := &stack[len(stack)-1]
		n := &t.Nodes[f.node]
		test, first, second := g.cond(n)
		switch f.state {
		case 0:
			if startLine {
				newline(b, f.indent)
			}
			b.WriteString("CASE WHEN " + test + " THEN")
			f.state = 1
			if terminal(first) {
				b.WriteString(" " + code(first))
				if g.comments {
					fmt.Fprintf(b, " -- node %d%s", n.ID, strings.Replace(comment(first), " --", ",", 1))
				}
				startLine = true
				continue
			}
			if g.comments {
				fmt.Fprintf(b, " -- node %d", n.ID)
			}
			startLine = true
			stack = append(stack, frame{first, f.indent + 1, 0})
		case 1:
			newline(b, f.indent)
			b.WriteString("ELSE")
			if terminal(second) {
				b.WriteString(" " + code(second) + comment(second))
				newline(b, f.indent)
				b.WriteString("END")
				stack = stack[:len(stack)-1]
				continue
			}
			f.state = 2
			startLine = true
			stack = append(stack, frame{second, f.indent + 1, 0})
		case 2:
			newline(b, f.indent)
			b.WriteString("END")
			stack = stack[:len(stack)-1]
		}
	}
}

// The table layout: trees become leaf numbers first. A descent stage
// computes, per tree, an integer state: -(k+1) once the row has reached the
// tree's k-th leaf (in preorder), or the index of the node it has reached
// when the tree is deeper than one stage may nest. Stage 0 walks from the
// root down to depth MaxNest; every later stage s walks from the splits at
// depth cut(s), picked by a binary search on the state (ceil(log2 F) levels
// for F such splits, plus one), down as many more levels as MaxNest leaves,
// so no CASE nests deeper than MaxNest. A chain (F = 1) thus advances
// MaxNest-1 levels a stage.

// treeCuts returns the depths at which tree ti's descent stages start
// (cuts[0] = 0), one per stage, plus the depth past the last one.
func (g *gen) treeCuts(ti int) []int32 {
	if c := g.cutsOf[ti]; c != nil {
		return c
	}
	t := &g.p.Trees[ti]
	var perDepth []int // splits at each depth
	for i := range t.Nodes {
		if !t.Nodes[i].IsLeaf() {
			d := int(g.depth[ti][i])
			for len(perDepth) <= d {
				perDepth = append(perDepth, 0)
			}
			perDepth[d]++
		}
	}
	cuts := []int32{0, int32(g.nest)}
	for int(cuts[len(cuts)-1]) < len(perDepth) {
		c := cuts[len(cuts)-1]
		cuts = append(cuts, c+int32(g.stageDepth(perDepth[c])))
	}
	g.cutsOf[ti] = cuts
	return cuts
}

// stageDepth is how many levels a stage starting from f splits walks:
// what MaxNest leaves after the binary search and its final equality.
func (g *gen) stageDepth(f int) int {
	return max(1, g.nest-1-bits(f-1))
}

// bits is the number of binary digits of n (0 for 0): a binary search over
// n+1 entries takes that many levels.
func bits(n int) int {
	b := 0
	for ; n > 0; n >>= 1 {
		b++
	}
	return b
}

func (g *gen) cut(ti, s int) int32 { return g.treeCuts(ti)[s] }

// descentStages is how many descent stages tree ti needs.
func (g *gen) descentStages(ti int) int { return len(g.treeCuts(ti)) - 1 }

// stateCode writes a node's state: a leaf's -(ordinal+1), a split's index.
func (g *gen) stateCode(ti int) func(int32) string {
	t := &g.p.Trees[ti]
	ord := g.ord[ti]
	return func(i int32) string {
		if t.Nodes[i].IsLeaf() {
			return strconv.Itoa(int(-(ord[i] + 1)))
		}
		return strconv.Itoa(int(i))
	}
}

// writeDispatch writes descent stage s (>= 1) of tree ti: rows whose state
// is one of the splits at depth cut(s) walk on from it; every other state
// (a leaf reached earlier) stays as it is.
func (g *gen) writeDispatch(b *strings.Builder, ti, s int) {
	t := &g.p.Trees[ti]
	at := g.cut(ti, s)
	var front []int32
	for i := range t.Nodes {
		if !t.Nodes[i].IsLeaf() && g.depth[ti][i] == at {
			front = append(front, int32(i))
		}
	}
	if len(front) == 0 {
		panic(fmt.Sprintf("BUG: sql: tree %d has no splits at depth %d in stage %d", ti, at, s))
	}
	next := g.cut(ti, s+1)
	levels := max(0, g.nest-1-int(next-at)) // binary-search levels left
	n := nodeCol(ti)
	code := g.stateCode(ti)
	var rec func(lo, hi, levels, indent int)
	rec = func(lo, hi, levels, indent int) { // recursion depth <= log2(len(front))
		switch {
		case hi-lo == 1:
			fmt.Fprintf(b, "CASE WHEN %s = %d THEN", n, front[lo])
			newline(b, indent+1)
			g.writeTree(b, ti, front[lo], next, code, indent+1)
			newline(b, indent)
			b.WriteString("ELSE " + n + " END")
		case levels == 0:
			b.WriteString("CASE " + n)
			for _, f := range front[lo:hi] {
				newline(b, indent)
				fmt.Fprintf(b, "WHEN %d THEN", f)
				newline(b, indent+1)
				g.writeTree(b, ti, f, next, code, indent+1)
			}
			newline(b, indent)
			b.WriteString("ELSE " + n + " END")
		default:
			mid := (lo + hi) / 2
			fmt.Fprintf(b, "CASE WHEN %s < %d THEN", n, front[mid])
			newline(b, indent+1)
			rec(lo, mid, levels-1, indent+1)
			newline(b, indent)
			b.WriteString("ELSE")
			newline(b, indent+1)
			rec(mid, hi, levels-1, indent+1)
			newline(b, indent)
			b.WriteString("END")
		}
	}
	rec(0, len(front), levels, 2)
}

// writeLookup writes output j of tree ti's leaf from its state column: a
// binary search on the leaf number, nesting at most MaxNest deep (then a
// simple CASE over what is left).
func (g *gen) writeLookup(b *strings.Builder, ti, j int) {
	t := &g.p.Trees[ti]
	var leaves []int32
	for i := range t.Nodes {
		if t.Nodes[i].IsLeaf() {
			leaves = append(leaves, int32(i))
		}
	}
	n := nodeCol(ti)
	val := func(k int) string { return g.acc(g.leafValue(ti, leaves[k], j)) }
	if len(leaves) > 2 && g.d == Spark {
		g.sparkArrayLookup(b, n, len(leaves), func(k int) float64 { return g.leafValue(ti, leaves[k], j) })
		return
	}
	if len(leaves) > 2 && (g.d == Postgres || g.d == DuckDB) {
		g.writeArrayLookup(b, n, len(leaves), func(k int) float64 { return g.leafValue(ti, leaves[k], j) })
		return
	}
	var rec func(lo, hi, levels, indent int)
	rec = func(lo, hi, levels, indent int) { // recursion depth <= log2(len(leaves))
		switch {
		case hi-lo == 1:
			b.WriteString(val(lo))
		case hi-lo == 2 && levels > 0:
			fmt.Fprintf(b, "CASE WHEN %s >= %d THEN %s ELSE %s END", n, -(lo + 1), val(lo), val(lo+1))
		case levels == 0:
			b.WriteString("CASE " + n)
			for k := lo; k < hi-1; k++ {
				newline(b, indent+1)
				fmt.Fprintf(b, "WHEN %d THEN %s", -(k + 1), val(k))
			}
			newline(b, indent+1)
			b.WriteString("ELSE " + val(hi-1))
			newline(b, indent)
			b.WriteString("END")
		default:
			mid := (lo + hi) / 2
			// leaf k has state -(k+1): leaves below mid have state >= -mid.
			fmt.Fprintf(b, "CASE WHEN %s >= %d THEN", n, -mid)
			newline(b, indent+1)
			rec(lo, mid, levels-1, indent+1)
			newline(b, indent)
			b.WriteString("ELSE")
			newline(b, indent+1)
			rec(mid, hi, levels-1, indent+1)
			newline(b, indent)
			b.WriteString("END")
		}
	}
	rec(0, len(leaves), g.nest, 2)
}

// writeArrayLookup indexes a constant array by the leaf number, in O(1)
// per row where a binary search costs log2(leaves) comparisons: leaf k has
// state -(k+1), and arrays count from 1. PostgreSQL reads the array from
// text, '{1.5e+00,...}'::float8[], each element through float8in (exact, -0
// kept); DuckDB's list literal [1.5e+00, ...] holds DOUBLE literals. Float32
// sums index '{...}'::real[] (float4in, exact for a float32 value's digits)
// and CAST([...] AS FLOAT[]) (each double a float32 value, cast exactly).
func (g *gen) writeArrayLookup(b *strings.Builder, n string, count int, v func(int) float64) {
	if g.d == Postgres {
		b.WriteString("('{")
		for k := 0; k < count; k++ {
			if k > 0 {
				b.WriteByte(',')
			}
			b.WriteString(strconv.FormatFloat(v(k), 'e', -1, 64))
		}
		if g.native32() {
			b.WriteString("}'::real[])[-" + n + "]")
		} else {
			b.WriteString("}'::float8[])[-" + n + "]")
		}
		return
	}
	if g.native32() {
		b.WriteString("CAST(")
	}
	b.WriteString("[")
	for k := 0; k < count; k++ {
		if k > 0 {
			b.WriteString(", ")
		}
		b.WriteString(g.d.num(v(k)))
	}
	if g.native32() {
		b.WriteString("] AS FLOAT[])[-" + n + "]")
		return
	}
	b.WriteString("][-" + n + "]")
}
