package compile

// walkPaths walks a tree depth first, left before right, keeping in st (one
// span per feature) the facts of the path to the node it is at, with an
// undo log and no recursion: O(nodes) in time, O(features + depth) in
// memory. At a split, follow says which children to enter: both are entered
// with the split's fact applied to st; a child entered alone is entered
// without it (follow found the split decided, so its fact adds nothing).
// At a leaf, leaf is called with the box st, valid during the call; false
// stops the walk. The prune pass decides splits with it, and LeafRows
// builds rows from the boxes of leaves.
func walkPaths(nodes []Node, st []span, r rules, follow func(n *Node) (left, right bool), leaf func(i int32, box []span) bool) {
	type undo struct {
		f   int
		old span
	}
	type visit struct {
		node int32
		mark int   // undo log length to return to before applying the fact
		from int32 // the split the fact comes from, -1 for the root
		left bool
	}
	var log []undo
	stack := []visit{{node: 0, from: -1}}
	for len(stack) > 0 {
		v := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		for len(log) > v.mark {
			u := log[len(log)-1]
			st[u.f] = u.old
			log = log[:len(log)-1]
		}
		if v.from >= 0 {
			n := &nodes[v.from]
			log = append(log, undo{n.Feature, st[n.Feature]})
			r.narrow(&st[n.Feature], n, v.left)
		}
		i := v.node
		for {
			n := &nodes[i]
			if n.IsLeaf() {
				if !leaf(i, st) {
					return
				}
				break
			}
			left, right := follow(n)
			switch {
			case left && right:
				mark := len(log)
				stack = append(stack,
					visit{node: n.Right, mark: mark, from: i, left: false},
					visit{node: n.Left, mark: mark, from: i, left: true})
			case right:
				i = n.Right
				continue
			default:
				i = n.Left
				continue
			}
			break
		}
	}
}

// Interval is what the facts of a path allow of one feature's compared
// value: the numbers from Lo to Hi (an end excluded when open), and NaN
// when NaN may take the path. Lo > Hi, or Lo == Hi with an open end, holds
// no number.
type Interval struct {
	Lo, Hi         float64
	LoOpen, HiOpen bool
	NaN            bool
}

// LeafBox returns the facts of the path from t's root to leaf, one Interval
// per feature of p, as the prune pass derives them: the comparisons, the
// missing-value routing, and format 2's bands and set splits (see prune).
// With comparisonsOnly, every split counts as the comparison of its value
// with its threshold and its NaN routing alone, the facts of a reader that
// walks trees so (the emitted Go test's row builder). A feature the path
// does not test is unbounded and may be NaN.
func LeafBox(p *Program, t *Tree, leaf int32, comparisonsOnly bool) []Interval {
	parent := make([]int32, len(t.Nodes))
	parent[0] = -1
	for i := range t.Nodes {
		if n := &t.Nodes[i]; !n.IsLeaf() {
			parent[n.Left], parent[n.Right] = int32(i), int32(i)
		}
	}
	var path []int32 // leaf first
	for c := leaf; c >= 0; c = parent[c] {
		path = append(path, c)
	}
	st := make([]span, len(p.Features))
	for f := range st {
		st[f] = fullSpan()
	}
	r := rulesOf(p)
	r.comparisons = comparisonsOnly
	for k := len(path) - 1; k > 0; k-- {
		n := &t.Nodes[path[k]]
		r.narrow(&st[n.Feature], n, n.Left == path[k-1])
	}
	box := make([]Interval, len(st))
	for f, s := range st {
		box[f] = Interval{Lo: s.lo, Hi: s.hi, LoOpen: s.loOpen, HiOpen: s.hiOpen, NaN: s.nan}
	}
	return box
}
