package forest

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// Validate checks every rule of the format; messages start with name. A Forest
// built by hand (a trainer, an importer, a test) must pass it before use.
func (f *Forest) Validate(name string) error { return f.validate(name, nil) }

// validate checks the header and every tree. wrongLen lists, per tree, leaves
// whose vector had the wrong length in the file (their slots hold zeros).
func (f *Forest) validate(name string, wrongLen map[int]map[int]int) error {
	var p Problems
	switch f.Task {
	case Classification, Regression:
	default:
		p.Add("%s: unknown task %q (want \"classification\" or \"regression\")", name, f.Task)
	}
	switch f.Combine {
	case Average, Sum, Vote:
	default:
		p.Add("%s: unknown combine %q (want \"average\", \"sum\" or \"vote\")", name, f.Combine)
	}
	switch f.Transform {
	case NoTransform, Logistic, Softmax:
	default:
		p.Add("%s: unknown output_transform %q (want \"none\", \"logistic\" or \"softmax\")", name, f.Transform)
	}
	switch f.InputPrecision {
	case Float64, Float32:
	default:
		p.Add("%s: unknown input_precision %q (want \"float64\" or \"float32\")", name, f.InputPrecision)
	}
	if len(f.Features) == 0 {
		p.Add("%s: \"features\" is empty: a model needs at least one input", name)
	}
	seen := make(map[string]int, len(f.Features))
	for i, s := range f.Features {
		if j, dup := seen[s]; dup {
			p.Add("%s: feature %d has the same name as feature %d: %s", name, i, j, quoteName(s))
		} else {
			seen[s] = i
		}
	}
	if f.Task == Classification {
		if len(f.Classes) < 2 {
			p.Add("%s: a classifier needs at least two classes, found %d", name, len(f.Classes))
		}
		cs := make(map[string]int, len(f.Classes))
		for i, s := range f.Classes {
			if j, dup := cs[s]; dup {
				p.Add("%s: class %d has the same label as class %d: %s", name, i, j, quoteName(s))
			} else {
				cs[s] = i
			}
		}
		if f.Transform == Logistic && len(f.Classes) != 2 {
			p.Add("%s: output_transform \"logistic\" needs exactly two classes, found %d\nhint: use \"softmax\" for more than two classes", name, len(f.Classes))
		}
	} else if f.Task == Regression {
		if f.Classes != nil {
			p.Add("%s: a regression model has no \"classes\"", name)
		}
		if f.Combine == Vote {
			p.Add("%s: combine \"vote\" needs a classifier", name)
		}
	}
	if len(f.Trees) == 0 {
		p.Add("%s: \"trees\" is empty: a model needs at least one tree", name)
	}
	if p.Len() > 0 {
		return p.Err()
	}
	k := f.NumOutputs()
	if len(f.BaseScore) != k {
		p.Add("%s: base_score has %d entries, the model has %d outputs", name, len(f.BaseScore), k)
	}
	for i, v := range f.BaseScore {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			p.Add("%s: base_score[%d] is %v", name, i, v)
		}
	}
	var stack []int
	for ti := range f.Trees {
		stack = f.Trees[ti].check(name, ti, len(f.Features), k, wrongLen[ti], &p, stack)
		if p.Full() {
			break
		}
	}
	return p.Err()
}

// check walks the tree from the root with an explicit stack, so a tree of any
// depth is checked in O(nodes) time and memory. It reports bad child ids, any
// node reached twice (which also catches cycles), bad split features and
// thresholds, and bad vectors at reachable leaves.
func (t *Tree) check(name string, ti, nf, k int, wrongLen map[int]int, p *Problems, stack []int) []int {
	n := t.NumNodes()
	if len(t.Feature) != n || len(t.Threshold) != n || len(t.Right) != n ||
		len(t.MissingLeft) != n || len(t.Value) != n*k || n == 0 {
		p.Add("%s: tree %d: arrays of unequal length or no nodes", name, ti)
		return stack
	}
	at := func(i int) string { return fmt.Sprintf("%s: tree %d, node %d", name, ti, i) }
	seen := make([]bool, n)
	seen[0] = true
	stack = append(stack[:0], 0)
	for len(stack) > 0 && !p.Full() {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		l, r := t.Left[i], t.Right[i]
		if l == -1 {
			if r != -1 {
				p.Add("%s: left is -1 (a leaf) but right is %d", at(i), r)
				continue
			}
			if got, bad := wrongLen[i]; bad {
				p.Add("%s: value has %d entries, the model has %d outputs", at(i), got, k)
				continue
			}
			for j, v := range t.Value[i*k : (i+1)*k] {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					p.Add("%s: value[%d] is %v", at(i), j, v)
					break
				}
			}
			continue
		}
		if fi := t.Feature[i]; fi < 0 || fi >= nf {
			p.Add("%s: splits on feature %d, but the model has features 0 to %d", at(i), fi, nf-1)
		}
		if th := t.Threshold[i]; math.IsNaN(th) || math.IsInf(th, 0) {
			p.Add("%s: threshold is %v", at(i), th)
		}
		for _, c := range [2]int{r, l} {
			switch {
			case c < 0 || c >= n:
				p.Add("%s: child id %d is out of range (the tree has nodes 0 to %d)", at(i), c, n-1)
			case seen[c]:
				p.Add("%s: child %d is reached twice (a tree may not share nodes or loop)", at(i), c)
			default:
				seen[c] = true
				stack = append(stack, c)
			}
		}
	}
	return stack
}

// quoteName quotes a name for a message, cutting a long one short and
// giving its length, so a name of a megabyte does not fill the screen.
func quoteName(s string) string {
	const keep = 64
	if len(s) <= keep {
		return strconv.Quote(s)
	}
	cut := keep
	for cut > 0 && !utf8.RuneStart(s[cut]) {
		cut--
	}
	return fmt.Sprintf("%s… (%d bytes)", strconv.Quote(s[:cut]), len(s))
}
