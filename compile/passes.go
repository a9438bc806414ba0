package compile

import (
	"fmt"
	"io"
	"slices"
	"time"

	"github.com/sawmill-dev/sawmill/forest"
)

// Pass is one step of the pipeline. A pass is exact when, for every input row
// (missing values, ±0, infinities and subnormals included), the program's
// outputs stay bit-identical to the interpreter's; exact passes run by
// default, lossy ones only when Options.Lossy names them.
type Pass struct {
	Name  string
	Fn    func(*Program)
	Exact bool
	Doc   string
}

// Passes is the pipeline, in the order it runs.
var Passes = []Pass{
	{"vote", lowerVote, true, "turn vote leaves into one-hot vectors of their winning class and combine by average"},
	{"prune", prune, true, "drop splits decided by the interval and missing-value facts of their path"},
	{"fold", fold, true, "replace a split whose two subtrees are identical by one of them"},
	{"leaves32", roundLeaves32, false, "round every leaf value to the nearest float32 (lossy)"},
	{"float32", float32Compare, true, "rewrite float32-model comparisons so the target needs no float32 arithmetic"},
	{"used", markUsed, true, "mark the features no split tests"},
}

// Constraint says that pass Before must run before pass After, and why.
type Constraint struct{ Before, After, Reason string }

// Order lists the ordering constraints between passes; a test checks that
// Passes satisfies every one.
var Order = []Constraint{
	{"vote", "fold", "one-hot leaves make leaves with the same winning class identical, which fold then merges"},
	{"prune", "fold", "pruning removes decided splits and so creates identical siblings"},
	{"prune", "float32", "interval analysis reasons about the model's own comparisons"},
	{"fold", "used", "folding can remove the last split on a feature"},
	{"prune", "used", "pruning can remove the last split on a feature"},
}

// Options controls a compilation.
type Options struct {
	// SingleInputs asks for the Single comparison form: the target receives
	// float32 inputs (a C target built with float).
	SingleInputs bool
	Lossy        []string  // lossy passes to run, by name
	Skip         []string  // exact passes not to run, by name (for debugging)
	DumpAfter    string    // write the program's text form after this pass
	Dump         io.Writer // where DumpAfter writes
}

// Stat reports what one pass did.
type Stat struct {
	Pass          string
	Exact         bool
	Ran           bool
	NodesBefore   int
	NodesAfter    int
	LeavesBefore  int
	LeavesAfter   int
	Duration      time.Duration
	SplitsRemoved int
}

// Compile lowers a validated forest and runs the pass pipeline.
func Compile(f *forest.Forest, o Options) (*Program, []Stat, error) {
	p := Lower(f)
	stats, err := Run(p, o)
	if err != nil {
		return nil, stats, err
	}
	return p, stats, nil
}

// Run runs the pipeline on p in place. Unknown pass names in Options are an
// error; a panic inside a pass is returned as an error naming the pass.
func Run(p *Program, o Options) ([]Stat, error) {
	known := map[string]Pass{}
	for _, ps := range Passes {
		known[ps.Name] = ps
	}
	for _, n := range o.Lossy {
		ps, ok := known[n]
		if !ok {
			return nil, fmt.Errorf("unknown pass %q", n)
		}
		if ps.Exact {
			return nil, fmt.Errorf("pass %q is exact and always runs; only lossy passes can be asked for", n)
		}
	}
	for _, n := range o.Skip {
		if _, ok := known[n]; !ok {
			return nil, fmt.Errorf("unknown pass %q", n)
		}
	}
	if o.DumpAfter != "" {
		if _, ok := known[o.DumpAfter]; !ok && o.DumpAfter != "lower" {
			return nil, fmt.Errorf("unknown pass %q", o.DumpAfter)
		}
	}
	p.SingleInputs = o.SingleInputs
	if o.DumpAfter == "lower" && o.Dump != nil {
		if err := Format(o.Dump, p); err != nil {
			return nil, err
		}
	}
	if err := Check(p); err != nil {
		return nil, fmt.Errorf("BUG: lowered program: %v", err)
	}
	var stats []Stat
	for _, ps := range Passes {
		run := ps.Exact && !slices.Contains(o.Skip, ps.Name) || !ps.Exact && slices.Contains(o.Lossy, ps.Name)
		st := Stat{Pass: ps.Name, Exact: ps.Exact, Ran: run, NodesBefore: p.NumNodes(), LeavesBefore: p.NumLeaves()}
		if run {
			start := time.Now()
			if err := runPass(ps, p); err != nil {
				return stats, err
			}
			st.Duration = time.Since(start)
			if err := Check(p); err != nil {
				return stats, fmt.Errorf("BUG: after pass %s: %v", ps.Name, err)
			}
		}
		st.NodesAfter, st.LeavesAfter = p.NumNodes(), p.NumLeaves()
		st.SplitsRemoved = (st.NodesBefore - st.LeavesBefore) - (st.NodesAfter - st.LeavesAfter)
		stats = append(stats, st)
		if o.DumpAfter == ps.Name && o.Dump != nil {
			if err := Format(o.Dump, p); err != nil {
				return stats, err
			}
		}
	}
	return stats, nil
}

func runPass(ps Pass, p *Program) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("BUG: pass %s panicked: %v", ps.Name, r)
		}
	}()
	ps.Fn(p)
	return nil
}
