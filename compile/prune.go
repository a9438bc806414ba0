package compile

import (
	"math"

	"github.com/sawmill-dev/sawmill/forest"
)

// prune decides splits from the facts of their path. Along each root-to-leaf
// path every feature's compared value is known to lie in an interval of the
// extended reals, and to be possibly NaN or certainly not. A split is
// decided when every value its path allows, missing included, goes the same
// way; sweep then replaces it by that child. Features are independent, so
// each reached node is reachable by some input, and only decided splits are
// removed: the pass is exact.
//
// Version 2 routing makes some numbers missing (the missing band, and the
// zero band at zero_missing splits) and adds set splits. The facts stay
// intervals, so they over-approximate, which only ever leaves a split
// undecided: on the side a missing value takes, the interval is the hull of
// what the comparison allows and of the band values the path allowed; a set
// split's members lie inside MemberRange's bounds, and its non-members
// anywhere, so only the member side narrows. A set split is decided when
// the path allows no member, or only values of one listed category.
//
// For numeric splits alone the analysis is complete: before the float32
// pass every split is x <= t, so every interval is (lo, hi] or unbounded,
// and one that is not empty holds hi itself, so every split left can go
// both ways.
//
// The walk is one depth-first traversal (walkPaths).
func prune(p *Program) {
	nf := len(p.Features)
	st := make([]span, nf)
	r := rulesOf(p)
	for ti := range p.Trees {
		for f := range st {
			st[f] = fullSpan()
		}
		pruneTree(p.Trees[ti].Nodes, st, r)
	}
	sweep(p)
}

// span is what a path allows of one feature's compared value.
type span struct {
	lo, hi         float64
	loOpen, hiOpen bool
	nan            bool // the value may be NaN
}

func fullSpan() span { return span{lo: math.Inf(-1), hi: math.Inf(1), nan: true} }

// empty reports whether no number lies in s.
func (s span) empty() bool { return s.lo > s.hi || s.lo == s.hi && (s.loOpen || s.hiOpen) }

// allows reports whether some non-missing value of s goes left (or right) at
// a split comparing with op and t. An empty span allows nothing.
func (s span) allows(op Op, t float64, left bool) bool {
	if s.empty() {
		return false
	}
	switch {
	case left && op == LE: // some v <= t
		return s.lo < t || s.lo == t && !s.loOpen
	case left: // some v < t
		return s.lo < t
	case op == LE: // some v > t
		return s.hi > t
	default: // some v >= t
		return s.hi > t || s.hi == t && !s.hiOpen
	}
}

// meets reports whether s holds a number of the closed interval [a, b].
func (s span) meets(a, b float64) bool {
	return !s.empty() && a <= b &&
		(b > s.lo || b == s.lo && !s.loOpen) && (a < s.hi || a == s.hi && !s.hiOpen)
}

// clip intersects s's numbers with the interval from a to b (open ends as
// told); the NaN flag is kept.
func (s span) clip(a float64, aOpen bool, b float64, bOpen bool) span {
	if a > s.lo || a == s.lo && aOpen {
		s.lo, s.loOpen = a, aOpen
	}
	if b < s.hi || b == s.hi && bOpen {
		s.hi, s.hiOpen = b, bOpen
	}
	return s
}

// hull is the smallest span holding the numbers of both; NaN flag of s.
func (s span) hull(o span) span {
	switch {
	case o.empty():
		return s
	case s.empty():
		o.nan = s.nan
		return o
	}
	if o.lo < s.lo || o.lo == s.lo && !o.loOpen {
		s.lo, s.loOpen = o.lo, o.loOpen
	}
	if o.hi > s.hi || o.hi == s.hi && !o.hiOpen {
		s.hi, s.hiOpen = o.hi, o.hiOpen
	}
	return s
}

// rules is what the interval analysis needs of a program beyond its nodes.
type rules struct {
	round32 bool // compared values are float32 values: thresholds are effective ones
	match   forest.CategoryMatch
	// catRound32: set splits see another value than the spans describe, so
	// they neither narrow nor get decided.
	catRound32     bool
	hasBand        bool
	bandLo, bandHi float64
	zeroLo, zeroHi float64
	// comparisons: every split is its comparison with its threshold and its
	// NaN routing alone (set splits and the bands are not looked at), the
	// facts of a reader that walks trees so (see LeafBox).
	comparisons bool
}

func rulesOf(p *Program) rules {
	return rules{round32: p.Compare == Round32, match: p.CategoryMatch, catRound32: p.CategoryRound32,
		hasBand: p.HasMissingValue, bandLo: p.MissingLo, bandHi: p.MissingHi,
		zeroLo: -p.ZeroBound, zeroHi: p.ZeroBound}
}

// bands returns the part of s that counts as missing at n without being
// NaN: the numbers of s in the missing band or, at a zero_missing split,
// in the zero band, as one hull (possibly empty).
func (r rules) bands(s span, n *Node) span {
	out := span{lo: math.Inf(1), hi: math.Inf(-1)}
	if r.comparisons {
		return out
	}
	if r.hasBand && s.meets(r.bandLo, r.bandHi) {
		out = out.hull(s.clip(r.bandLo, false, r.bandHi, false))
	}
	if n.ZeroMissing && s.meets(r.zeroLo, r.zeroHi) {
		out = out.hull(s.clip(r.zeroLo, false, r.zeroHi, false))
	}
	out.nan = false
	return out
}

// canMiss reports whether some value of s counts as missing at n.
func (r rules) canMiss(s span, n *Node) bool { return s.nan || !r.bands(s, n).empty() }

// routes reports whether some value of s goes left, and some right, at n.
func (r rules) routes(s span, n *Node) (canLeft, canRight bool) {
	miss := r.canMiss(s, n)
	if !n.IsSetSplit() {
		t := effective(n.Threshold, r.round32)
		return s.allows(n.Op, t, true) || miss && n.MissingLeft, s.allows(n.Op, t, false) || miss && !n.MissingLeft
	}
	if r.catRound32 {
		return true, true
	}
	members := r.members(s, n)
	return !members.empty() || miss && n.MissingLeft, !r.allMembers(s, n) || miss && !n.MissingLeft
}

// members is the part of s where members of n's categories may lie.
func (r rules) members(s span, n *Node) span {
	lo, loOpen, hi, ok := MemberRange(r.match, n.Categories)
	if !ok {
		return span{lo: math.Inf(1), hi: math.Inf(-1), nan: s.nan}
	}
	return s.clip(lo, loOpen, hi, true)
}

// allMembers reports whether every number of s is a member at n (true for
// an empty s): s lies within one listed category.
func (r rules) allMembers(s span, n *Node) bool {
	if s.empty() {
		return true
	}
	if math.IsInf(s.lo, 0) || math.IsInf(s.hi, 0) || s.hi >= forest.MaxCategory {
		return false
	}
	c := math.Trunc(s.hi)
	if s.hi == c && s.hiOpen {
		c-- // s lies below the integer hi
	}
	var lo float64
	var loOpen bool
	switch {
	case r.match == forest.MatchExact:
		if !(s.lo == s.hi && s.lo == c) {
			return false
		}
		lo = c
	case r.match == forest.MatchTruncate && c == 0:
		lo, loOpen = -1, true
	default:
		lo = c
	}
	if c < 0 || s.lo < lo || s.lo == lo && loOpen && !s.loOpen {
		return false
	}
	return forest.MatchExact.IsMember(c, n.Categories)
}

// narrow applies to s the fact that the value went left (or right) at n.
func (r rules) narrow(s *span, n *Node, left bool) {
	var num span // the non-missing values of s that go this way
	set := n.IsSetSplit() && !r.comparisons
	switch {
	case set && (r.catRound32 || !left):
		num = *s
	case set:
		num = r.members(*s, n)
	case left:
		open := n.Op == LT
		num = s.clip(math.Inf(-1), false, effective(n.Threshold, r.round32), open)
	default:
		open := n.Op == LE
		num = s.clip(effective(n.Threshold, r.round32), open, math.Inf(1), false)
	}
	if n.MissingLeft == left {
		num = num.hull(r.bands(*s, n))
		num.nan = s.nan
	} else {
		num.nan = false
	}
	*s = num
}

// effective is the threshold a split really compares with: for a float32
// model the compared value is a float32, and v <= t holds exactly when
// v <= Floor32(t). Using it makes the facts exact on the float32 grid, so an
// interval with no float32 in it counts as empty.
func effective(t float64, round32 bool) float64 {
	if round32 {
		return float64(Floor32(t))
	}
	return t
}

func pruneTree(nodes []Node, st []span, r rules) {
	walkPaths(nodes, st, r, func(n *Node) (bool, bool) {
		canLeft, canRight := r.routes(st[n.Feature], n)
		switch {
		case canLeft && canRight:
			return true, true
		case canRight:
			n.decided = goRight
			return false, true
		default: // only left, or (on a path no input takes) neither
			n.decided = goLeft
			return true, false
		}
	}, func(int32, []span) bool { return true })
}
