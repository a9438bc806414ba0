package emit

import (
	"fmt"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// Unsupported is the error of a target asked to write a construct it cannot
// (yet) write: rather than emit code that scores differently, it refuses the
// model. Golden runners take it as a model the target declines.
type Unsupported struct {
	Target    string // the target, as its --target name
	Construct string // what it cannot write, named as the model file does
	Where     string // its first use ("tree 3, node 17"), or "" for the model as a whole
	// Hint replaces the default hint (another target) when a layout of
	// the same target can write the construct.
	Hint string
}

func (e *Unsupported) Error() string {
	msg := fmt.Sprintf("the %s target cannot write %s yet", e.Target, e.Construct)
	if e.Where != "" {
		msg = e.Where + ": " + msg
	}
	if e.Hint != "" {
		return msg + "\nhint: " + e.Hint
	}
	return msg + "\nhint: compile this model for the go target"
}

// Names of the format 2 constructs in Unsupported.Construct.
const (
	ConstructAccumulate32 = "float32 accumulation (accumulate float32)"
	ConstructScale        = "a transform scale (transform_scale)"
	ConstructExp          = "output_transform exp"
	ConstructLogisticEach = "output_transform logistic_each"
	ConstructNormalize    = "output_transform normalize"
	ConstructOutputTrees  = "trees of one output (trees[].output)"
	ConstructSetSplits    = "set splits (trees[].categories)"
	ConstructZeroMissing  = "zero as missing (trees[].zero_missing)"
	ConstructMissingValue = "a missing value (missing_value)"
)

// Format2Uses lists the format 2 constructs p uses, each once, located at
// its first use, in the order of the constants above; Target is left empty
// for the caller. A target refuses with the first one it does not handle.
func Format2Uses(p *compile.Program) []Unsupported {
	var out []Unsupported
	add := func(c, where string) { out = append(out, Unsupported{Construct: c, Where: where}) }
	if p.Float32Accumulate() {
		add(ConstructAccumulate32, "")
	}
	if p.Scale() != 1 {
		add(ConstructScale, "")
	}
	switch p.Transform {
	case forest.Exp:
		add(ConstructExp, "")
	case forest.LogisticEach:
		add(ConstructLogisticEach, "")
	case forest.Normalize:
		add(ConstructNormalize, "")
	}
	var outTree, set, zero string
	for ti := range p.Trees {
		t := &p.Trees[ti]
		if t.HasOutput && p.NumOutputs > 1 && outTree == "" {
			outTree = fmt.Sprintf("tree %d", t.Source)
		}
		for i := range t.Nodes {
			n := &t.Nodes[i]
			if n.IsSetSplit() && set == "" {
				set = fmt.Sprintf("tree %d, node %d", t.Source, n.ID)
			}
			if n.ZeroMissing && zero == "" {
				zero = fmt.Sprintf("tree %d, node %d", t.Source, n.ID)
			}
		}
	}
	if outTree != "" {
		add(ConstructOutputTrees, outTree)
	}
	if set != "" {
		add(ConstructSetSplits, set)
	}
	if zero != "" {
		add(ConstructZeroMissing, zero)
	}
	if p.HasMissingValue {
		add(ConstructMissingValue, "")
	}
	return out
}
