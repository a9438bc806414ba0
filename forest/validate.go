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
	case NoTransform, Logistic, Softmax, Exp, LogisticEach, Normalize:
	default:
		p.Add("%s: unknown output_transform %q (want \"none\", \"logistic\", \"softmax\", \"exp\", \"logistic_each\" or \"normalize\")", name, f.Transform)
	}
	switch f.InputPrecision {
	case Float64, Float32:
	default:
		p.Add("%s: unknown input_precision %q (want \"float64\" or \"float32\")", name, f.InputPrecision)
	}
	switch f.Accumulate {
	case "", Float64, Float32:
	default:
		p.Add("%s: unknown accumulate %q (want \"float64\" or \"float32\")", name, f.Accumulate)
	}
	switch f.CategoryMatch {
	case "", MatchFloor, MatchTruncate, MatchExact:
	default:
		p.Add("%s: unknown category_match %q (want \"floor\", \"truncate\" or \"exact\")", name, f.CategoryMatch)
	}
	if s := f.TransformScale; math.IsNaN(s) || math.IsInf(s, 0) {
		p.Add("%s: transform_scale is %v: it must be a finite non-zero number", name, s)
	}
	if f.HasMissingValue && (math.IsNaN(f.MissingValue) || math.IsInf(f.MissingValue, 0)) {
		p.Add("%s: missing_value is %v: it must be a finite number (NaN is always missing)", name, f.MissingValue)
	}
	switch {
	case f.Outputs < 0:
		p.Add("%s: outputs is %d: a model has at least one output", name, f.Outputs)
	case f.Outputs > 0 && f.Task == Classification:
		p.Add("%s: \"outputs\" is for regression models only: a classifier has an output per class", name)
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
	if f.Transform == Logistic && k > 1 {
		p.Add("%s: output_transform \"logistic\" needs one output, the model has %d\nhint: use \"logistic_each\" to apply the logistic to each output", name, k)
	}
	perOutput := make([]int, k) // trees adding to each output
	for ti := range f.Trees {
		t := &f.Trees[ti]
		if !t.HasOutput {
			continue
		}
		if f.Combine == Vote {
			p.Add("%s: tree %d: a tree with \"output\" cannot be combined by vote (a vote needs every class's value)", name, ti)
		}
		if t.Output < 0 || t.Output >= k {
			p.Add("%s: tree %d: output %d is out of range (the model has outputs 0 to %d)", name, ti, t.Output, k-1)
		} else {
			perOutput[t.Output]++
		}
	}
	if f.Combine == Average && p.Len() == 0 {
		shared := 0
		for ti := range f.Trees {
			if !f.Trees[ti].HasOutput {
				shared++
			}
		}
		for j, n := range perOutput {
			if n+shared == 0 {
				p.Add("%s: output %d has no trees to average\nhint: give it a tree, or combine by \"sum\"", name, j)
			}
		}
	}
	if p.Len() > 0 {
		return p.Err()
	}
	if len(f.BaseScore) != k {
		p.Add("%s: base_score has %d entries, the model has %d outputs", name, len(f.BaseScore), k)
	}
	for i, v := range f.BaseScore {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			p.Add("%s: base_score[%d] is %v", name, i, v)
		}
	}
	var stack []int
	f32 := f.Accumulate == Float32
	for ti := range f.Trees {
		stack = f.Trees[ti].check(name, ti, len(f.Features), k, f32, wrongLen[ti], &p, stack)
		if p.Full() {
			break
		}
	}
	return p.Err()
}

// check walks the tree from the root with an explicit stack, so a tree of any
// depth is checked in O(nodes) time and memory. It reports bad child ids, any
// node reached twice (which also catches cycles), bad split features,
// thresholds and category lists, and bad vectors at reachable leaves (with
// f32, leaves float32 cannot hold).
func (t *Tree) check(name string, ti, nf, k int, f32 bool, wrongLen map[int]int, p *Problems, stack []int) []int {
	n := t.NumNodes()
	w := t.Width(k)
	if len(t.Feature) != n || len(t.Threshold) != n || len(t.Right) != n ||
		len(t.MissingLeft) != n || len(t.Value) != n*w || n == 0 ||
		t.Categories != nil && len(t.Categories) != n || t.ZeroMissing != nil && len(t.ZeroMissing) != n {
		p.Add("%s: tree %d: arrays of unequal length or no nodes", name, ti)
		return stack
	}
	wantLen := fmt.Sprintf("the model has %d outputs", k)
	if t.HasOutput {
		wantLen = "a tree with \"output\" has 1"
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
				p.Add("%s: value has %d entries, %s", at(i), got, wantLen)
				continue
			}
			for j, v := range t.Value[i*w : (i+1)*w] {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					p.Add("%s: value[%d] is %v", at(i), j, v)
					break
				}
				if f32 && Round32(v) != v {
					p.Add("%s: value[%d] is %v, which float32 cannot hold (the model accumulates in float32)\nhint: round the leaves to float32, or accumulate in float64", at(i), j, v)
					break
				}
			}
			continue
		}
		if fi := t.Feature[i]; fi < 0 || fi >= nf {
			p.Add("%s: splits on feature %d, but the model has features 0 to %d", at(i), fi, nf-1)
		}
		if t.IsSetSplit(i) {
			checkCategories(t.Categories[i], at(i), p)
		} else if th := t.Threshold[i]; math.IsNaN(th) || math.IsInf(th, 0) {
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

// checkCategories reports a set split's list that is not sorted, repeats a
// category, or holds one outside [0, 2^31).
func checkCategories(c []int32, at string, p *Problems) {
	for j, v := range c {
		switch {
		case v < 0:
			p.Add("%s: categories holds %d, outside [0, 2^31)", at, v)
		case j > 0 && v == c[j-1]:
			p.Add("%s: categories lists %d twice", at, v)
		case j > 0 && v < c[j-1]:
			p.Add("%s: categories are not sorted (%d after %d)", at, v, c[j-1])
		default:
			continue
		}
		return
	}
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
