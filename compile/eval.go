package compile

import (
	"github.com/sawmill-dev/sawmill/forest"
)

// Eval scores one row with the Program itself, the way an emitted target
// would: every test as the Program states it (rounding inputs to float32
// for Round32 and Single, and for set splits under CategoryRound32),
// additions in tree order in the accumulation precision, then the scale and
// the transform. Tests hold it against the forest interpreter to prove
// passes exact.
func Eval(p *Program, x, out []float64) {
	k := p.NumOutputs
	f32 := p.Float32Accumulate()
	if p.Combine == forest.Sum {
		copy(out, p.BaseScore)
	} else {
		clear(out[:k])
	}
	for ti := range p.Trees {
		t := &p.Trees[ti]
		leaf := p.Leaf(t, x)
		switch {
		case p.Combine == forest.Vote:
			out[forest.Argmax(leaf)]++
		case t.HasOutput:
			out[t.Output] = add(f32, out[t.Output], leaf[0])
		default:
			for j, v := range leaf {
				out[j] = add(f32, out[j], v)
			}
		}
	}
	if p.Combine != forest.Sum {
		for j := 0; j < k; j++ {
			n := float64(p.TreesAddingTo(j))
			if f32 {
				out[j] = float64(float32(out[j]) / float32(n))
				out[j] = float64(float32(out[j]) + float32(p.BaseScore[j]))
			} else {
				out[j] = out[j]/n + p.BaseScore[j]
			}
		}
	}
	p.finisher().Finish(out[:k])
}

// add is one addition of the accumulation.
func add(f32 bool, a, b float64) float64 {
	if f32 {
		return float64(float32(a) + float32(b))
	}
	return a + b
}

// finisher is a forest carrying just what forest.Forest.Finish reads (the
// accumulation, the scale and the transform), so that the scale and the
// transform are the interpreter's own code.
func (p *Program) finisher() *forest.Forest {
	return &forest.Forest{Accumulate: p.Accumulate, TransformScale: p.TransformScale, Transform: p.Transform}
}

// Leaf returns the value vector of the leaf row x reaches in tree t.
func (p *Program) Leaf(t *Tree, x []float64) []float64 {
	i := int32(0)
	for {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			return n.Value
		}
		v := x[n.Feature]
		if p.Compare != Double {
			v = float64(float32(v))
		}
		left := false
		switch {
		case p.IsMissing(n, v):
			left = n.MissingLeft
		case n.IsSetSplit():
			left = p.Member(n, v)
		default:
			left = n.Op == LE && v <= n.Threshold || n.Op == LT && v < n.Threshold
		}
		if left {
			i = n.Left
		} else {
			i = n.Right
		}
	}
}

// Leaf returns the value vector of the leaf row x reaches, for a tree of a
// program with comparison form c and the format's defaults elsewhere (no
// missing band, floor category matching); Program.Leaf reads them all.
func (t *Tree) Leaf(c Compare, x []float64) []float64 {
	return (&Program{Compare: c, ZeroBound: forest.ZeroMissingBound}).Leaf(t, x)
}
