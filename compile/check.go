package compile

import (
	"fmt"
	"math"

	"github.com/sawmill-dev/sawmill/forest"
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
	f32 := false
	switch p.Accumulate {
	case "", forest.Float64:
	case forest.Float32:
		f32 = true
		for j, b := range p.BaseScore {
			if !isFloat32(b) {
				return fmt.Errorf("base score %d (%v) is not a float32 value under float32 accumulation", j, b)
			}
		}
	default:
		return fmt.Errorf("unknown accumulate %q", p.Accumulate)
	}
	if s := p.TransformScale; math.IsNaN(s) || math.IsInf(s, 0) {
		return fmt.Errorf("transform scale %v", s)
	}
	switch p.CategoryMatch {
	case "", forest.MatchFloor, forest.MatchTruncate, forest.MatchExact:
	default:
		return fmt.Errorf("unknown category match %q", p.CategoryMatch)
	}
	if p.CategoryRound32 && p.Compare != Double {
		return fmt.Errorf("set splits round to float32 in a %v program", p.Compare)
	}
	if err := checkMidpoints32(p); err != nil {
		return err
	}
	if p.HasMissingValue {
		lo, hi := p.MissingLo, p.MissingHi
		if math.IsNaN(lo) || math.IsNaN(hi) || lo > hi {
			return fmt.Errorf("missing band [%v, %v]", lo, hi)
		}
		if p.Compare == Single && !(isFloat32(lo) && isFloat32(hi)) {
			return fmt.Errorf("missing band [%v, %v] is not of float32 values in a single-precision program", lo, hi)
		}
	}
	if z := p.ZeroBound; !(z >= 0) || math.IsInf(z, 0) || p.Compare == Single && !isFloat32(z) {
		return fmt.Errorf("zero bound %v", z)
	}
	nf := len(p.Features)
	for ti := range p.Trees {
		t := &p.Trees[ti]
		if len(t.Nodes) == 0 {
			return fmt.Errorf("tree %d: no nodes", t.Source)
		}
		width := k
		if t.HasOutput {
			if t.Output < 0 || t.Output >= k {
				return fmt.Errorf("tree %d: output %d out of range", t.Source, t.Output)
			}
			if p.Combine == forest.Vote {
				return fmt.Errorf("tree %d: a tree of one output in a vote program", t.Source)
			}
			width = 1
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
				if len(n.Value) != width {
					return at("leaf vector has %d entries, want %d", len(n.Value), width)
				}
				if n.Feature != -1 {
					return at("leaf tests feature %d", n.Feature)
				}
				if n.ZeroMissing || n.Categories != nil {
					return at("leaf with split data")
				}
				if f32 {
					for _, v := range n.Value {
						if !isFloat32(v) {
							return at("leaf value %v is not a float32 value under float32 accumulation", v)
						}
					}
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
			if n.Categories != nil {
				if n.Op != LE || n.Threshold != 0 {
					return at("set split with op %v and threshold %v", n.Op, n.Threshold)
				}
				for j, c := range n.Categories {
					if c < 0 || j > 0 && c <= n.Categories[j-1] {
						return at("categories not sorted, distinct and non-negative at %d", c)
					}
				}
			}
			if math.IsNaN(n.Threshold) || math.IsInf(n.Threshold, 0) {
				return at("threshold %v", n.Threshold)
			}
			if p.Compare == Single && float64(float32(n.Threshold)) != n.Threshold {
				return at("threshold %v is not a float32 value in a single-precision program", n.Threshold)
			}
			if p.Compare == Round32 && n.Op != LE && n.Categories == nil {
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

// isFloat32 reports whether v is exactly a float32 value (±Inf included).
func isFloat32(v float64) bool { return float64(float32(v)) == v }

// checkMidpoints32 holds Program.Midpoints32 to the splits: when set, the
// program is in the Double form, has a numeric split, and every numeric
// split is the midpoint comparison of the finite float32 below it.
func checkMidpoints32(p *Program) error {
	if !p.Midpoints32 {
		return nil
	}
	if p.Compare != Double {
		return fmt.Errorf("midpoints of float32 thresholds in a %v program", p.Compare)
	}
	numeric := false
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			n := &p.Trees[ti].Nodes[i]
			if n.IsLeaf() || n.IsSetSplit() {
				continue
			}
			numeric = true
			t32 := Floor32(n.Threshold)
			if op, m := Midpoint32(n.Threshold); math.IsInf(float64(t32), 0) || op != n.Op || m != n.Threshold {
				return fmt.Errorf("tree %d, node %d: x %v %v is not the midpoint test of a finite float32, but the program says every split is",
					p.Trees[ti].Source, n.ID, n.Op, n.Threshold)
			}
		}
	}
	if !numeric {
		return fmt.Errorf("midpoints of float32 thresholds, but no numeric split")
	}
	return nil
}
