package compile

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"

	"github.com/sawmill-dev/sawmill/forest"
)

// Lower turns a validated forest into a Program with the same meaning: the
// reachable nodes of each tree in preorder, nothing else changed. It walks
// with an explicit stack, so any depth is fine. Every construct of format
// version 2 is carried (see the Program's fields).
func Lower(f *forest.Forest) *Program {
	var buf bytes.Buffer
	if err := f.Encode(&buf); err != nil {
		panic("BUG: compile.Lower: a validated forest does not encode: " + err.Error())
	}
	sum := sha256.Sum256(buf.Bytes())
	k := f.NumOutputs()
	p := &Program{
		Task:       f.Task,
		Classes:    append([]string(nil), f.Classes...),
		NumOutputs: k,
		Combine:    f.Combine,
		BaseScore:  append([]float64(nil), f.BaseScore...),
		Transform:  f.Transform,
		Compare:    Double,
		Hash:       hex.EncodeToString(sum[:]),
		Provenance: f.Provenance,
		Trees:      make([]Tree, len(f.Trees)),
	}
	if f.InputPrecision == forest.Float32 {
		p.Compare = Round32
	}
	p.ZeroBound = forest.ZeroMissingBound
	if f.Float32Accumulate() {
		p.Accumulate = forest.Float32
		for j, b := range p.BaseScore {
			p.BaseScore[j] = forest.Round32(b) // every use rounds it first
		}
	}
	if s := f.Scale(); s != 1 {
		p.TransformScale = s
	}
	if f.CategoryMatch != "" && f.CategoryMatch != forest.MatchFloor {
		p.CategoryMatch = f.CategoryMatch
	}
	if f.HasMissingValue {
		p.HasMissingValue, p.MissingLo, p.MissingHi = true, f.MissingValue, f.MissingValue
	}
	for _, name := range f.Features {
		p.Features = append(p.Features, Feature{Name: name, Used: true})
	}
	for ti := range f.Trees {
		p.Trees[ti] = lowerTree(&f.Trees[ti], ti, k)
	}
	return p
}

func lowerTree(t *forest.Tree, ti, k int) Tree {
	out := Tree{Source: ti, HasOutput: t.HasOutput, Output: t.Output}
	type item struct {
		src    int
		parent int32 // index in out.Nodes, -1 for the root
		left   bool
	}
	stack := []item{{src: 0, parent: -1}}
	for len(stack) > 0 {
		it := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		idx := int32(len(out.Nodes))
		if it.parent >= 0 {
			if it.left {
				out.Nodes[it.parent].Left = idx
			} else {
				out.Nodes[it.parent].Right = idx
			}
		}
		if t.IsLeaf(it.src) {
			out.Nodes = append(out.Nodes, Node{Feature: -1, Left: -1, Right: -1, ID: int32(it.src),
				Value: append([]float64(nil), t.Leaf(it.src, k)...)})
			continue
		}
		n := Node{Feature: t.Feature[it.src], Op: LE, Threshold: t.Threshold[it.src],
			MissingLeft: t.MissingLeft[it.src], ID: int32(it.src)}
		if t.ZeroMissing != nil {
			n.ZeroMissing = t.ZeroMissing[it.src]
		}
		if t.IsSetSplit(it.src) {
			n.Threshold = 0
			n.Categories = append([]int32{}, t.Categories[it.src]...)
		}
		out.Nodes = append(out.Nodes, n)
		// Right first so that the left subtree comes next in preorder.
		stack = append(stack, item{t.Right[it.src], idx, false}, item{t.Left[it.src], idx, true})
	}
	if len(out.Nodes) > 1<<31-1 {
		panic(fmt.Sprintf("BUG: tree %d has more nodes than an int32 indexes", ti))
	}
	return out
}
