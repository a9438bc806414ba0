package compile

import (
	"fmt"
	"math"

	"sawmill/forest"
)

// Check verifies the Program's invariants and returns the first violation,
// located by tree and node. Passes must leave a Program that passes Check;
// the driver runs it after every pass.
func Check(p *Program) error {
	k := p.NumOutputs
	if k < 1 {
		return fmt.Errorf("NumOutputs is %d", k)
	}
	if len(p.BaseScore) != k {
		return fmt.Errorf("BaseScore has %d entries, NumOutputs is %d", len(p.BaseScore), k)
	}
	switch p.Combine {
	case forest.Sum, forest.Average, forest.Vote:
	default:
		return fmt.Errorf("unknown combine %q", p.Combine)
	}
	if len(p.Trees) == 0 {
		return fmt.Errorf("no trees")
	}
	nf := len(p.Features)
	for ti := range p.Trees {
		t := &p.Trees[ti]
		if len(t.Nodes) == 0 {
			return fmt.Errorf("tree %d: no nodes", t.Source)
		}
		parents := make([]int32, len(t.Nodes))
		for i := range parents {
			parents[i] = -1
		}
		for i := range t.Nodes {
			n := &t.Nodes[i]
			at := func(format string, args ...any) error {
				return fmt.Errorf("tree %d, node %d (index %d): %s", t.Source, n.ID, i, fmt.Sprintf(format, args...))
			}
			if n.decided != undecided {
				return at("left decided by a pass but not swept")
			}
			if i > 0 && parents[i] == -1 {
				return at("unreachable (no parent)")
			}
			if n.IsLeaf() {
				if n.Right != -1 {
					return at("leaf with a right child")
				}
				if len(n.Value) != k {
					return at("leaf vector has %d entries, want %d", len(n.Value), k)
				}
				if n.Feature != -1 {
					return at("leaf tests feature %d", n.Feature)
				}
				continue
			}
			if n.Value != nil {
				return at("split carries a value")
			}
			if n.Feature < 0 || n.Feature >= nf {
				return at("feature %d out of range", n.Feature)
			}
			if !p.Features[n.Feature].Used {
				return at("tests feature %d, which is marked unused", n.Feature)
			}
			if n.Op != LE && n.Op != LT {
				return at("unknown op %d", n.Op)
			}
			if math.IsNaN(n.Threshold) || math.IsInf(n.Threshold, 0) {
				return at("threshold %v", n.Threshold)
			}
			if p.Compare == Single && float64(float32(n.Threshold)) != n.Threshold {
				return at("threshold %v is not a float32 value in a single-precision program", n.Threshold)
			}
			if p.Compare == Round32 && n.Op != LE {
				return at("op %v before the float32 pass", n.Op)
			}
			for _, c := range [2]int32{n.Left, n.Right} {
				if c <= int32(i) || int(c) >= len(t.Nodes) {
					return at("child index %d is not after the node and inside the tree", c)
				}
				if parents[c] != -1 {
					return at("child index %d has two parents", c)
				}
				parents[c] = int32(i)
			}
		}
	}
	return nil
}
