package compile

import (
	"encoding/json"
	"fmt"

	"sawmill/forest"
)

// Compare says what a split's comparison sees of the input.
type Compare int

const (
	// Round32 is a float32 model before the float32 pass: the input is
	// rounded to the nearest float32, then compared with a float64 threshold.
	// No emitter accepts it.
	Round32 Compare = iota
	// Double compares the float64 input as given with the threshold.
	Double
	// Single means inputs arrive as float32 and every threshold is a float32
	// value, so a target may compare in float32 arithmetic.
	Single
)

func (c Compare) String() string {
	switch c {
	case Round32:
		return "round32"
	case Double:
		return "double"
	case Single:
		return "single"
	}
	return fmt.Sprintf("Compare(%d)", int(c))
}

// Op is a split's comparison: the row goes left when x Op Threshold holds.
type Op uint8

const (
	LE Op = iota // x <= t
	LT           // x < t
)

func (o Op) String() string {
	if o == LT {
		return "<"
	}
	return "<="
}

// Program is the compiler's intermediate form: the forest as explicit split
// and leaf nodes plus everything an emitter needs. Invariants are checked by
// Check; every pass leaves them true.
type Program struct {
	Task     forest.Task
	Features []Feature // one per model input, in input order
	Classes  []string  // class labels for a classifier, else nil
	// NumOutputs is the length of every leaf vector, of BaseScore and of the
	// output; for a vote model it is the number of classes.
	NumOutputs int
	// Combine is Sum, Average or (before the vote pass) Vote.
	Combine   forest.Combine
	BaseScore []float64 // len NumOutputs
	Transform forest.Transform
	// Compare is what every comparison sees of the input (see Compare).
	Compare Compare
	// SingleInputs asks the float32 pass for the Single form (inputs arrive
	// as float32) rather than the Double form; set from Options by Compile.
	SingleInputs bool
	Trees        []Tree
	// Hash is the hex SHA-256 of the model file's canonical encoding; it
	// names the model in every emitted header.
	Hash       string
	Provenance json.RawMessage
}

// Feature is one model input.
type Feature struct {
	Name string // the model's name for it, any Unicode
	// Used is true exactly when some split of the program tests it; set by
	// the "used" pass (before it, every feature is marked used).
	Used bool
}

// Tree is one tree as a flat node slice in preorder: node 0 is the root and
// every child index is greater than its parent's.
type Tree struct {
	Source int // index of the tree in the model
	Nodes  []Node
}

// Node is a split or a leaf. A node is a leaf exactly when Left == -1, and
// then Right == -1 and len(Value) == Program.NumOutputs; at a split Value is
// nil and Left, Right index later nodes of the same tree.
type Node struct {
	Feature     int     // tested feature at a split; -1 at a leaf
	Op          Op      // comparison at a split
	Threshold   float64 // finite at a split
	MissingLeft bool    // a missing (NaN) input goes left at a split
	Left, Right int32   // child indices in Tree.Nodes; -1 at a leaf
	Value       []float64
	// ID is the node's id in the model file, for comments and messages.
	ID int32
	// decided is set by analysis passes and consumed by sweep: the split is
	// known to always go this way (goLeft or goRight), or undecided (0).
	decided uint8
}

const (
	undecided uint8 = iota
	goLeft
	goRight
)

// IsLeaf reports whether n is a leaf.
func (n *Node) IsLeaf() bool { return n.Left == -1 }

// NumNodes is the number of nodes over all trees.
func (p *Program) NumNodes() int {
	n := 0
	for i := range p.Trees {
		n += len(p.Trees[i].Nodes)
	}
	return n
}

// NumLeaves is the number of leaves over all trees.
func (p *Program) NumLeaves() int {
	n := 0
	for i := range p.Trees {
		for j := range p.Trees[i].Nodes {
			if p.Trees[i].Nodes[j].IsLeaf() {
				n++
			}
		}
	}
	return n
}

// MaxDepth is the largest number of splits on any root-to-leaf path.
func (p *Program) MaxDepth() int {
	d := 0
	for i := range p.Trees {
		d = max(d, p.Trees[i].Depth())
	}
	return d
}

// Depth is the largest number of splits on a root-to-leaf path. Preorder
// makes it one forward sweep.
func (t *Tree) Depth() int {
	depth := make([]int32, len(t.Nodes))
	best := int32(0)
	for i := range t.Nodes {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			best = max(best, depth[i])
			continue
		}
		depth[n.Left] = depth[i] + 1
		depth[n.Right] = depth[i] + 1
	}
	return int(best)
}

// IsClassifier reports whether the program predicts a class.
func (p *Program) IsClassifier() bool { return p.Task == forest.Classification }

// UsedFeatures returns the indices of the features some split tests.
func (p *Program) UsedFeatures() []int {
	var u []int
	for i, f := range p.Features {
		if f.Used {
			u = append(u, i)
		}
	}
	return u
}
