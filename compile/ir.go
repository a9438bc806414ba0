package compile

import (
	"encoding/json"
	"fmt"
	"math"

	"github.com/sawmill-dev/sawmill/forest"
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
	Combine forest.Combine
	// BaseScore has NumOutputs entries. Under float32 accumulation every
	// entry is a float32 value (Lower rounds the model's base score, as the
	// format's joining rules do before using it).
	BaseScore []float64
	Transform forest.Transform

	// Accumulate is the arithmetic of the joining, the scale and the
	// transform: forest.Float32 (every addition, division and the transform
	// are float32 operations, in the order Eval does them, and the
	// exponential is forest.Expf) or forest.Float64 ("" means Float64).
	// Under Float32 every leaf value and every BaseScore entry is a float32
	// value.
	Accumulate forest.Precision
	// TransformScale s multiplies the joined score once, before the
	// transform: z = s·z in float64, or z = round32(s)·z in float32 under
	// float32 accumulation. 0 stands for 1 (no multiplication); otherwise it
	// is finite and non-zero, and a value of 1 is never multiplied. Use
	// Scale to read it.
	TransformScale float64
	// CategoryMatch is how a value meets a set split's categories
	// (forest.CategoryMatch; "" means MatchFloor). See Member.
	CategoryMatch forest.CategoryMatch
	// CategoryRound32 says that set splits take the category of round32(x),
	// the input rounded to the nearest float32, while numeric splits and the
	// missing tests see x as given. Only the float32 pass sets it, when it
	// rewrites a float32-input model with set splits into the Double form;
	// it is false in every other form (under Round32 every test already sees
	// round32(x), under Single the input is a float32).
	CategoryRound32 bool
	// Midpoints32 says that every numeric split is x op m with
	// (op, m) = Midpoint32(t32) for a finite float32 t32 = Floor32(m), so
	// that x op m holds exactly when round32(x) <= t32: a target may store
	// t32 in a float and compare the input rounded to float with it. Only
	// the float32 pass sets it, when it rewrites a float32 model with
	// numeric splits into the Double form and no t32 is an infinity; it
	// is false in every other program (Check holds it to the splits).
	Midpoints32 bool
	// HasMissingValue says that a non-NaN input x also counts as missing, at
	// every split, when MissingLo <= x <= MissingHi, x being what the split
	// sees of the input under Compare. The bounds are not NaN and
	// MissingLo <= MissingHi; under Single both are float32 values. For a
	// float64 model with missing_value m the band is [m, m] (so m = 0 also
	// catches −0); the float32 pass widens it to the float64 inputs that
	// round to m, or drops it when no float32 input can equal m.
	HasMissingValue      bool
	MissingLo, MissingHi float64
	// ZeroBound is where zero_missing nodes draw the line: at a split with
	// Node.ZeroMissing, an input x with −ZeroBound <= x <= ZeroBound counts
	// as missing. It is forest.ZeroMissingBound for the Double and Round32
	// forms of the model as read; the float32 pass widens it for float64
	// inputs of a float32 model and keeps it (a float32 value) for Single.
	// Always finite and >= 0; meaningless when no node has ZeroMissing.
	ZeroBound float64
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
	// HasOutput says the tree adds to output Output only (0 <= Output <
	// NumOutputs): its leaf vectors then have length 1, and under average
	// it counts only towards that output's divisor (see
	// Program.TreesAddingTo). Never set in a vote program.
	HasOutput bool
	Output    int
}

// Node is a split or a leaf. A node is a leaf exactly when Left == -1, and
// then Right == -1 and len(Value) is Program.NumOutputs (1 in a tree with
// HasOutput); at a split Value is nil and Left, Right index later nodes of
// the same tree.
//
// At a split, what the split sees of the input (x under Compare) is first
// tested for missingness: NaN, the program's missing band
// (HasMissingValue), or, when ZeroMissing, |x| <= Program.ZeroBound. A
// missing x goes left exactly when MissingLeft. Otherwise a numeric split
// sends x left when x Op Threshold, and a set split (Categories != nil)
// when x is a member of Categories (see Program.Member).
type Node struct {
	Feature     int     // tested feature at a split; -1 at a leaf
	Op          Op      // comparison at a numeric split; LE at a set split
	Threshold   float64 // finite at a numeric split; 0 at a set split
	MissingLeft bool    // a missing input goes left at a split
	// ZeroMissing says that at this split an input with |x| <= ZeroBound
	// also counts as missing. False at leaves.
	ZeroMissing bool
	// Categories is nil at a numeric split and at a leaf. At a set split it
	// is the sorted list of distinct categories, each in
	// [0, forest.MaxCategory), whose values go left; an empty non-nil list
	// sends every non-missing value right.
	Categories  []int32
	Left, Right int32 // child indices in Tree.Nodes; -1 at a leaf
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

// IsSetSplit reports whether n is a split testing membership in Categories.
func (n *Node) IsSetSplit() bool { return n.Categories != nil }

// Float32Accumulate reports whether the joining and the transform are
// float32 arithmetic.
func (p *Program) Float32Accumulate() bool { return p.Accumulate == forest.Float32 }

// Scale is the transform scale: TransformScale, or 1 when it is 0.
func (p *Program) Scale() float64 {
	if p.TransformScale == 0 {
		return 1
	}
	return p.TransformScale
}

// TreesAddingTo is the number of trees that add to output j: the divisor
// of an average.
func (p *Program) TreesAddingTo(j int) int {
	n := 0
	for i := range p.Trees {
		if !p.Trees[i].HasOutput || p.Trees[i].Output == j {
			n++
		}
	}
	return n
}

// IsMissing reports whether x, what a split sees of the input under
// Compare (rounded to float32 under Round32 and Single), counts as missing
// at split n.
func (p *Program) IsMissing(n *Node, x float64) bool {
	return x != x || p.HasMissingValue && x >= p.MissingLo && x <= p.MissingHi ||
		n.ZeroMissing && x >= -p.ZeroBound && x <= p.ZeroBound
}

// Member reports whether a non-missing input x, as the split sees it under
// Compare, goes left at set split n: with CategoryRound32 the category is
// that of round32(x), then forest.CategoryMatch decides.
func (p *Program) Member(n *Node, x float64) bool {
	if p.CategoryRound32 {
		x = float64(float32(x))
	}
	return p.CategoryMatch.IsMember(x, n.Categories)
}

// MemberRange bounds the members of cats under m: every member v (as the
// category rule sees it) has lo <= v (lo < v when loOpen) and v < hi, and
// inside those bounds v's category is int32(v), Go's truncation, for every
// rule (exact also needs v == trunc(v)). So a target tests the bounds, then
// looks the category up (a bitset word, a sorted list, a switch). The bounds
// are integers, at most 2^31; compare them in float64 (a float32 input
// widens exactly; hi rounded to float32 could admit or drop a value). ok is
// false for an empty list, where nothing is a member.
func MemberRange(m forest.CategoryMatch, cats []int32) (lo float64, loOpen bool, hi float64, ok bool) {
	if len(cats) == 0 {
		return 0, false, 0, false
	}
	lo, hi = float64(cats[0]), float64(cats[len(cats)-1])+1
	if m == forest.MatchTruncate && cats[0] == 0 {
		return -1, true, hi, true // (−1, 0) truncates to category 0
	}
	return lo, false, hi, true
}

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

// Magnitudes returns the sum over trees of each tree's largest |leaf value|
// and the largest |base score|: what error bounds of the joined score are
// built from.
func (p *Program) Magnitudes() (leaves, base float64) {
	for ti := range p.Trees {
		big := 0.0
		for i := range p.Trees[ti].Nodes {
			for _, v := range p.Trees[ti].Nodes[i].Value {
				big = math.Max(big, math.Abs(v))
			}
		}
		leaves += big
	}
	for _, v := range p.BaseScore {
		base = math.Max(base, math.Abs(v))
	}
	return leaves, base
}
