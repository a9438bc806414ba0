package compile

import "math"

// prune decides splits from the facts of their path. Along each root-to-leaf
// path every feature's compared value is known to lie in an interval of the
// extended reals, and to be possibly missing or certainly not. A split is
// decided when every value its path allows, missing included, goes the same
// way; sweep then replaces it by that child. Features are independent, so
// each reached node is reachable by some input, and only decided splits are
// removed: the pass is exact. Before the float32 pass every split is x <= t,
// so every interval is (lo, hi] or unbounded, and one that is not empty
// holds hi itself: the analysis is complete, every split left can go both
// ways.
//
// The walk is one depth-first traversal with an undo log, O(nodes) in time
// and O(features + depth) in memory, with no recursion.
func prune(p *Program) {
	nf := len(p.Features)
	st := make([]span, nf)
	for ti := range p.Trees {
		for f := range st {
			st[f] = fullSpan()
		}
		pruneTree(p.Trees[ti].Nodes, st, p.Compare == Round32)
	}
	sweep(p)
}

// span is what a path allows of one feature's compared value.
type span struct {
	lo, hi         float64
	loOpen, hiOpen bool
	nan            bool // the value may be missing
}

func fullSpan() span { return span{lo: math.Inf(-1), hi: math.Inf(1), nan: true} }

// allows reports whether some non-missing value of s goes left (or right) at
// a split comparing with op and t. An empty span allows nothing.
func (s span) allows(op Op, t float64, left bool) bool {
	if s.lo > s.hi || s.lo == s.hi && (s.loOpen || s.hiOpen) {
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

// narrow applies the fact that the value went left (or right) at a split.
func (s *span) narrow(op Op, t float64, missingLeft, left bool) {
	if left {
		open := op == LT
		if t < s.hi || t == s.hi && open {
			s.hi, s.hiOpen = t, open
		}
		s.nan = s.nan && missingLeft
		return
	}
	open := op == LE
	if t > s.lo || t == s.lo && open {
		s.lo, s.loOpen = t, open
	}
	s.nan = s.nan && !missingLeft
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

func pruneTree(nodes []Node, st []span, round32 bool) {
	type undo struct {
		f   int
		old span
	}
	type visit struct {
		node int32
		mark int   // undo log length to return to before applying the fact
		f    int   // feature of the fact, -1 for the root
		from int32 // the split the fact comes from
		left bool
	}
	var log []undo
	stack := []visit{{node: 0, f: -1}}
	for len(stack) > 0 {
		v := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		for len(log) > v.mark {
			u := log[len(log)-1]
			st[u.f] = u.old
			log = log[:len(log)-1]
		}
		if v.f >= 0 {
			from := &nodes[v.from]
			log = append(log, undo{v.f, st[v.f]})
			st[v.f].narrow(from.Op, effective(from.Threshold, round32), from.MissingLeft, v.left)
		}
		i := v.node
		for {
			n := &nodes[i]
			if n.IsLeaf() {
				break
			}
			s, t := st[n.Feature], effective(n.Threshold, round32)
			canLeft := s.allows(n.Op, t, true) || s.nan && n.MissingLeft
			canRight := s.allows(n.Op, t, false) || s.nan && !n.MissingLeft
			switch {
			case canLeft && canRight:
				mark := len(log)
				stack = append(stack,
					visit{node: n.Right, mark: mark, f: n.Feature, from: i, left: false},
					visit{node: n.Left, mark: mark, f: n.Feature, from: i, left: true})
			case canRight:
				n.decided = goRight
				i = n.Right
				continue
			default: // only left, or (on a path no input takes) neither
				n.decided = goLeft
				i = n.Left
				continue
			}
			break
		}
	}
}
