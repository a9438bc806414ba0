package compile

import (
	"math"

	"sawmill/forest"
)

// Eval scores one row with the Program itself, the way an emitted target
// would: comparisons as the Program states them (rounding inputs to float32
// for Round32 and Single), additions in tree order. Tests hold it against the
// forest interpreter to prove passes exact.
func Eval(p *Program, x, out []float64) {
	k := p.NumOutputs
	if p.Combine == forest.Sum {
		copy(out, p.BaseScore)
	} else {
		clear(out[:k])
	}
	for ti := range p.Trees {
		leaf := p.Trees[ti].Leaf(p.Compare, x)
		if p.Combine == forest.Vote {
			out[forest.Argmax(leaf)]++
			continue
		}
		for j, v := range leaf {
			out[j] += v
		}
	}
	if p.Combine != forest.Sum {
		n := float64(len(p.Trees))
		for j := 0; j < k; j++ {
			out[j] = out[j]/n + p.BaseScore[j]
		}
	}
	forest.ApplyTransform(p.Transform, out[:k])
}

// Leaf returns the value vector of the leaf row x reaches.
func (t *Tree) Leaf(c Compare, x []float64) []float64 {
	i := int32(0)
	for {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			return n.Value
		}
		v := x[n.Feature]
		if c != Double {
			v = float64(float32(v))
		}
		switch {
		case math.IsNaN(v):
			if n.MissingLeft {
				i = n.Left
			} else {
				i = n.Right
			}
		case n.Op == LE && v <= n.Threshold, n.Op == LT && v < n.Threshold:
			i = n.Left
		default:
			i = n.Right
		}
	}
}
