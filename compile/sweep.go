package compile

// sweep rebuilds every tree that has decided splits: each decided split is
// replaced by the child it always takes, everything no longer reachable is
// dropped, and the survivors are renumbered in preorder. It is the one place
// where nodes are deleted; analysis passes only mark.
func sweep(p *Program) {
	for ti := range p.Trees {
		t := &p.Trees[ti]
		dirty := false
		for i := range t.Nodes {
			if t.Nodes[i].decided != undecided {
				dirty = true
				break
			}
		}
		if dirty {
			t.Nodes = sweepTree(t.Nodes)
		}
	}
}

func sweepTree(nodes []Node) []Node {
	out := make([]Node, 0, len(nodes))
	type item struct {
		src    int32
		parent int32
		left   bool
	}
	stack := []item{{src: 0, parent: -1}}
	for len(stack) > 0 {
		it := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		src := it.src
		for nodes[src].decided != undecided { // skip decided splits
			if nodes[src].decided == goLeft {
				src = nodes[src].Left
			} else {
				src = nodes[src].Right
			}
		}
		idx := int32(len(out))
		if it.parent >= 0 {
			if it.left {
				out[it.parent].Left = idx
			} else {
				out[it.parent].Right = idx
			}
		}
		n := nodes[src]
		out = append(out, n)
		if !n.IsLeaf() {
			stack = append(stack, item{n.Right, idx, false}, item{n.Left, idx, true})
		}
	}
	return out
}
