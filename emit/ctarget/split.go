package ctarget

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// Format 2's splits in C: set splits, the missing band and zero-as-missing.
//
// A set split tests membership with NAME_member(v, s), s numbering the
// distinct category lists of the program. The test first applies the
// model's category rule (forest.CategoryMatch) in double: v must lie in
// [0, 2^31) (floor, exact) or (-1, 2^31) (truncate), where converting v to
// int32_t truncates it toward zero and is defined (C99 6.3.1.4); exact also
// needs v to equal that integer. The category then meets set s either as
// a bit of a bitset (a range check against the set's first category and
// span, then one word of NAME_set_bits) or, for a list too sparse for a
// bitset, by binary search in NAME_set_list. A set is a bitset unless that
// takes more than setListSlack bytes beyond the sorted list; both are static
// const data, so a split of thousands of categories costs its bytes and
// no code.
//
// Missingness comes first: NaN, then the program's missing band
// (compile.Program.HasMissingValue) and, at a split with ZeroMissing, the
// zero band [-ZeroBound, ZeroBound]; both are tested on the input as the
// split sees it, and a missing input goes where MissingLeft says.

// noinlineSites is the number of set splits above which nested code keeps
// NAME_member out of line (gcc and clang, through __attribute__).
const noinlineSites = 64

// setSites is the number of set splits in p.
func (g *gen) setSites() int {
	n := 0
	for ti := range g.p.Trees {
		for i := range g.p.Trees[ti].Nodes {
			if g.p.Trees[ti].Nodes[i].IsSetSplit() {
				n++
			}
		}
	}
	return n
}

// setListSlack is how many bytes a bitset may take beyond the sorted list
// of the same categories and still be chosen: a bitset is one load and a
// shift where the list takes a binary search.
const setListSlack = 64

// setTable numbers the distinct category lists of p's set splits: the
// bitsets first, then the sorted lists.
type setTable struct {
	index map[string]int // by category list, the set number
	sets  []catSet
	bits  []uint32 // every bitset's words, back to back
	list  []uint32 // every sorted list, back to back
	nBits int      // sets 0..nBits-1 are bitsets
}

// catSet is one set: a bitset of n bits from category lo, or a sorted list
// of n categories, starting at word or element at.
type catSet struct {
	cats   []int32
	lo, n  uint32
	at     uint32
	bitset bool
}

func catKey(cats []int32) string {
	var b strings.Builder
	for _, c := range cats {
		fmt.Fprintf(&b, "%d,", c)
	}
	return b.String()
}

func newSetTable(p *compile.Program) *setTable {
	st := &setTable{index: map[string]int{}}
	var bitsets, lists []catSet
	seen := map[string]bool{}
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			n := &p.Trees[ti].Nodes[i]
			if !n.IsSetSplit() {
				continue
			}
			key := catKey(n.Categories)
			if seen[key] {
				continue
			}
			seen[key] = true
			c := catSet{cats: n.Categories}
			if len(n.Categories) > 0 {
				span := int64(n.Categories[len(n.Categories)-1]) - int64(n.Categories[0]) + 1
				words := (span + 31) / 32
				c.bitset = 4*words <= 4*int64(len(n.Categories))+setListSlack
				if c.bitset {
					c.lo, c.n = uint32(n.Categories[0]), uint32(span)
				}
			} else {
				c.bitset = true // no bits: nothing is a member
			}
			if c.bitset {
				bitsets = append(bitsets, c)
			} else {
				c.n = uint32(len(n.Categories))
				lists = append(lists, c)
			}
		}
	}
	st.nBits = len(bitsets)
	for _, c := range bitsets {
		c.at = uint32(len(st.bits))
		words := make([]uint32, (c.n+31)/32)
		for _, v := range c.cats {
			o := uint32(v) - c.lo
			words[o/32] |= 1 << (o % 32)
		}
		st.bits = append(st.bits, words...)
		st.index[catKey(c.cats)] = len(st.sets)
		st.sets = append(st.sets, c)
	}
	for _, c := range lists {
		c.at = uint32(len(st.list))
		for _, v := range c.cats {
			st.list = append(st.list, uint32(v))
		}
		st.index[catKey(c.cats)] = len(st.sets)
		st.sets = append(st.sets, c)
	}
	return st
}

// of is the set number of split n's categories.
func (st *setTable) of(n *compile.Node) int {
	s, ok := st.index[catKey(n.Categories)]
	if !ok {
		panic("BUG: ctarget: set split without a set")
	}
	return s
}

// writeSets writes the set tables and NAME_member, when p has set splits.
func (g *gen) writeSets(w *printer) {
	st := g.sets
	if len(st.sets) == 0 {
		return
	}
	if g.layout == emit.Nested && !slices.ContainsFunc(st.sets, func(c catSet) bool { return len(c.cats) > 0 }) {
		// Nested code tests an empty set as 0 (member), so nothing would
		// call NAME_member, and -Werror=unused-function fails the build.
		return
	}
	// u32 writes a table of the narrowest unsigned type that holds vals,
	// or of uint32_t when wide is set.
	u32 := func(name, what string, vals []uint32, wide bool) {
		n := max(len(vals), 1)
		big := uint32(0)
		for _, v := range vals {
			big = max(big, v)
		}
		eb := 4
		if !wide {
			eb = intBytes(int(big))
		}
		w.line("static const %s %s_%s[%d] = {", uintType(eb), g.name, name, n)
		if len(vals) == 0 {
			w.line("\t0u")
		}
		g.numbers(w, len(vals), func(i int) string { return fmt.Sprintf("%du", vals[i]) })
		w.line("};")
		g.tables = append(g.tables, Table{Name: g.name + "_" + name, What: what, Len: n, ElemBytes: eb})
	}
	var lo, n, at []uint32
	for _, c := range st.sets {
		lo, n, at = append(lo, c.lo), append(n, c.n), append(at, c.at)
	}
	w.line("/* Set splits: %d distinct category lists. Set s < %d is a bitset of set_n[s]", len(st.sets), st.nBits)
	w.line(" * bits from category set_lo[s], at word set_at[s] of set_bits; the others are")
	w.line(" * sorted lists of set_n[s] categories from element set_at[s] of set_list. */")
	u32("set_n", "bits or categories per set", n, false)
	u32("set_at", "first word or element per set", at, false)
	if st.nBits > 0 {
		u32("set_lo", "first category per bitset", lo[:st.nBits], false)
		u32("set_bits", "bitset words", st.bits, true)
	}
	if st.nBits < len(st.sets) {
		u32("set_list", "sorted category lists", st.list, true)
	}
	w.line("")
	var rule, test string
	switch g.p.CategoryMatch {
	case forest.MatchTruncate:
		rule, test = "v > -1 and v < 2^31, its integer part (toward zero)", "v > -1.0 && v < 2147483648.0"
	case forest.MatchExact:
		rule, test = "v an integer in [0, 2^31)", "v >= 0.0 && v < 2147483648.0"
	default:
		rule, test = "v >= 0 and v < 2^31, its integer part", "v >= 0.0 && v < 2147483648.0"
	}
	w.line("/* 1 when v, an input that is not missing, is a member of set s: v's category")
	w.line(" * (%s) is listed. */", rule)
	if g.layout == emit.Nested && g.setSites() > noinlineSites {
		// Inlined at thousands of splits it nearly trebles gcc's build
		// (11.7 s against 6.9 s for the 100-tree model of
		// TestSetSplitBytesPerNode, 4.4 s with numeric splits alone).
		w.line("#if defined(__GNUC__)")
		w.line("__attribute__((noinline))")
		w.line("#endif")
	}
	w.line("static uint32_t %s_member(double v, uint32_t s)", g.name)
	w.line("{")
	w.in()
	w.line("uint32_t c;")
	w.line("if (!(%s)) { /* NaN and infinities too */", test)
	w.line("\treturn 0u;")
	w.line("}")
	w.line("c = (uint32_t)(int32_t)v; /* defined: v's integer part is in [0, 2^31) */")
	if g.p.CategoryMatch == forest.MatchExact {
		w.line("if ((double)(int32_t)v != v) {")
		w.line("\treturn 0u;")
		w.line("}")
	}
	bitset := func() {
		w.line("c -= (uint32_t)%s_set_lo[s];", g.name)
		w.line("if (c >= (uint32_t)%s_set_n[s]) {", g.name)
		w.line("\treturn 0u;")
		w.line("}")
		w.line("return (%s_set_bits[(uint32_t)%s_set_at[s] + (c >> 5)] >> (c & 31u)) & 1u;", g.name, g.name)
	}
	list := func() {
		w.line("lo = (uint32_t)%s_set_at[s];", g.name)
		w.line("end = lo + (uint32_t)%s_set_n[s];", g.name)
		w.line("hi = end;")
		w.line("while (lo < hi) {")
		w.line("\tconst uint32_t mid = lo + (hi - lo) / 2u;")
		w.line("\tif (%s_set_list[mid] < c) {", g.name)
		w.line("\t\tlo = mid + 1u;")
		w.line("\t} else {")
		w.line("\t\thi = mid;")
		w.line("\t}")
		w.line("}")
		w.line("return (uint32_t)(lo < end && %s_set_list[lo] == c);", g.name)
	}
	if st.nBits > 0 && st.nBits < len(st.sets) {
		w.line("if (s < %du) {", st.nBits)
		w.in()
	}
	if st.nBits > 0 {
		bitset()
	}
	if st.nBits > 0 && st.nBits < len(st.sets) {
		w.out()
		w.line("}")
	}
	if st.nBits < len(st.sets) {
		w.line("{")
		w.in()
		w.line("uint32_t lo, hi, end;")
		list()
		w.out()
		w.line("}")
	}
	w.out()
	w.line("}")
	w.line("")
}

// boundLit is a literal of the input type for a bound of the missing
// bands, which may be infinite.
func (g *gen) boundLit(v float64) string {
	inf := "HUGE_VAL"
	if g.o.Float {
		inf = "HUGE_VALF"
	}
	switch {
	case math.IsInf(v, 1):
		return inf
	case math.IsInf(v, -1):
		return "(-" + inf + ")"
	}
	return g.lit(v)
}

// band is the C test lo <= x <= hi, without a side that holds for every
// number; "" when the band holds every number.
func (g *gen) band(x string, lo, hi float64) string {
	var parts []string
	if !math.IsInf(lo, -1) {
		parts = append(parts, x+" >= "+g.boundLit(lo))
	}
	if !math.IsInf(hi, 1) {
		parts = append(parts, x+" <= "+g.boundLit(hi))
	}
	if len(parts) == 0 {
		return "(" + x + " == " + x + ")" // every number, not NaN
	}
	return "(" + strings.Join(parts, " && ") + ")"
}

// extraMissing is the C test that x, not NaN, counts as missing at split n
// (the missing band, the zero band), or "" when only NaN is missing there.
func (g *gen) extraMissing(n *compile.Node, x string) string {
	p := g.p
	var parts []string
	if p.HasMissingValue {
		parts = append(parts, g.band(x, p.MissingLo, p.MissingHi))
	}
	if n.ZeroMissing {
		parts = append(parts, g.band(x, -p.ZeroBound, p.ZeroBound))
	}
	if len(parts) == 0 {
		return ""
	}
	if len(parts) == 1 {
		return parts[0]
	}
	return "(" + strings.Join(parts, " || ") + ")"
}

// hasZeroMissing reports whether some split of p counts zeros as missing.
func hasZeroMissing(p *compile.Program) bool {
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			if p.Trees[ti].Nodes[i].ZeroMissing {
				return true
			}
		}
	}
	return false
}

// memberArg is the double NAME_member takes for input x: x itself, x
// widened from float, or, for a program whose set splits see round32(x),
// x rounded to float and widened back.
func (g *gen) memberArg(x string) string {
	switch {
	case g.o.Float:
		return "(double)" + x
	case g.p.CategoryRound32:
		return "(double)(float)" + x
	}
	return x
}

// member is the C test that x, not missing, goes left at set split n.
func (g *gen) member(n *compile.Node, x string) string {
	if len(n.Categories) == 0 {
		return "0"
	}
	return fmt.Sprintf("%s_member(%s, %du)", g.name, g.memberArg(x), g.sets.of(n))
}
