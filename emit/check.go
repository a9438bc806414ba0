package emit

import (
	"fmt"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// CheckProgram is the precondition every target t checks at the top of
// Emit: the passes every emitter relies on have run (the float32 pass, the
// vote pass), the program holds compile.Check's invariants, and it was
// compiled for the inputs the target takes: float32 inputs when single is
// set (compile.Options.SingleInputs), else float64. A broken invariant is a
// BUG; the wrong inputs are the caller's mistake, and the error says so in
// the same words for every target.
func CheckProgram(t Target, p *compile.Program, single bool) error {
	target := t.Name
	orFloat := ""
	if t.Float {
		orFloat = ", or emit the float build"
	}
	switch {
	case p.Compare == compile.Round32:
		return fmt.Errorf("BUG: %s: the program still compares round32(x); the float32 pass must run first", target)
	case p.Compare == compile.Single && !single:
		return fmt.Errorf("%s: the program was compiled for float32 inputs, and this build takes float64 inputs\nhint: compile without SingleInputs%s", target, orFloat)
	case p.Compare == compile.Double && single:
		return fmt.Errorf("%s: the program was compiled for float64 inputs, and this build takes float32 inputs\nhint: compile with SingleInputs", target)
	case p.Compare != compile.Single && p.Compare != compile.Double:
		return fmt.Errorf("BUG: %s: unknown comparison %v", target, p.Compare)
	}
	if p.Combine != forest.Sum && p.Combine != forest.Average {
		return fmt.Errorf("BUG: %s: combine %q reached the emitter; the vote pass lowers it", target, p.Combine)
	}
	if len(p.Trees) == 0 || len(p.Features) == 0 || p.NumOutputs < 1 || len(p.BaseScore) != p.NumOutputs {
		return fmt.Errorf("BUG: %s: program with %d trees, %d features, %d outputs, %d base scores", target, len(p.Trees), len(p.Features), p.NumOutputs, len(p.BaseScore))
	}
	if err := compile.Check(p); err != nil {
		return fmt.Errorf("BUG: %s: %v", target, err)
	}
	return nil
}

// CommentNodes is the largest program, in nodes, whose emitted code carries
// a comment with the model's node id at every node when the comment knob is
// left at 0.
const CommentNodes = 5000

// NodeComments is the one comment knob of every target (each Options'
// Comments): 0 writes node comments for programs of at most CommentNodes
// nodes, > 0 always, < 0 never.
func NodeComments(knob int, p *compile.Program) bool {
	switch {
	case knob > 0:
		return true
	case knob < 0:
		return false
	}
	return p.NumNodes() <= CommentNodes
}
