package compile

import (
	"fmt"

	"sawmill/forest"
)

// Unsupported returns an error naming the first construct of format version
// 2 in f that the compiler and its emitters do not implement yet, and where
// it occurs ("tree 3, node 7: set splits are not supported by the compiler
// yet"), or nil when f compiles exactly. Compile calls it first and Lower
// panics on a model it rejects, so no target ever receives a program that
// scores differently from forest.Predict. A category_match without set
// splits, and version 2 keys at their defaults, change nothing and pass.
// The message carries no file name: callers put theirs in front.
func Unsupported(f *forest.Forest) error {
	hint := "\nhint: sawmill predict scores this model with the reference interpreter"
	for ti := range f.Trees {
		t := &f.Trees[ti]
		if t.HasOutput {
			return fmt.Errorf("tree %d: a tree with an \"output\" of its own (per-output trees) is not supported by the compiler yet%s", ti, hint)
		}
		for _, i := range reachableNodes(t) {
			switch {
			case t.IsLeaf(i):
			case t.IsSetSplit(i):
				return fmt.Errorf("tree %d, node %d: set splits are not supported by the compiler yet%s", ti, i, hint)
			case t.ZeroMissing != nil && t.ZeroMissing[i]:
				return fmt.Errorf("tree %d, node %d: zero_missing (zeros counted as missing) is not supported by the compiler yet%s", ti, i, hint)
			}
		}
	}
	switch {
	case f.Float32Accumulate():
		return fmt.Errorf("accumulate \"float32\" is not supported by the compiler yet%s", hint)
	case f.Transform == forest.Exp || f.Transform == forest.LogisticEach || f.Transform == forest.Normalize:
		return fmt.Errorf("output_transform %q is not supported by the compiler yet%s", f.Transform, hint)
	case f.Scale() != 1:
		return fmt.Errorf("transform_scale %v is not supported by the compiler yet%s", f.Scale(), hint)
	case f.Outputs > 1:
		return fmt.Errorf("a regression model of %d outputs is not supported by the compiler yet%s", f.Outputs, hint)
	case f.HasMissingValue:
		return fmt.Errorf("missing_value %v is not supported by the compiler yet%s", f.MissingValue, hint)
	}
	return nil
}
