// Package forest holds sawmill's model type: a tree ensemble as described by
// the forest file format (versions 1 and 2), its JSON codec and validation,
// the reference interpreter that every emitted program is held against, and
// the reading of CSV row files.
//
// The interpreter is the specification in code: Predict follows the format's
// "Meaning" section step by step, and nothing else in sawmill may decide
// differently from it.
package forest

import (
	"encoding/json"
	"math"
	"slices"
)

// FormatVersion is the newest value of "sawmill_forest" this reader knows;
// it reads every version from 1 to FormatVersion. A writer writes version 1
// for a model that uses nothing of version 2 (see Forest.Version).
const FormatVersion = 2

// Task says what the model predicts.
type Task string

const (
	Classification Task = "classification"
	Regression     Task = "regression"
)

// Combine says how the trees' value vectors are joined.
type Combine string

const (
	Average Combine = "average"
	Sum     Combine = "sum"
	Vote    Combine = "vote"
)

// Transform is applied to the combined vector last.
type Transform string

const (
	NoTransform Transform = "none"
	Logistic    Transform = "logistic"
	Softmax     Transform = "softmax"
	// Exp is e^z per output (version 2: log-link objectives).
	Exp Transform = "exp"
	// LogisticEach is the logistic function applied to each output on its
	// own (version 2: one-versus-rest classifiers).
	LogisticEach Transform = "logistic_each"
	// Normalize divides each output by the sum of all outputs, summed in
	// order; a zero sum gives all zeros (version 2).
	Normalize Transform = "normalize"
)

// CategoryMatch is how a value meets a set split's list of categories
// (version 2's "category_match"); see Category.
type CategoryMatch string

const (
	// MatchFloor: v >= 0, v < 2^31 and ⌊v⌋ listed. The default; "" means it.
	MatchFloor CategoryMatch = "floor"
	// MatchTruncate: v > −1, v < 2^31 and v rounded toward zero listed.
	MatchTruncate CategoryMatch = "truncate"
	// MatchExact: v equals a listed integer exactly.
	MatchExact CategoryMatch = "exact"
)

// MaxCategory is one above the largest category a set split may list:
// categories are integers in [0, MaxCategory).
const MaxCategory = 1 << 31

// Category returns the category a (non-missing) value v counts as under m,
// and false when it counts as none, so that it goes right at every set
// split: NaN, ±Inf, values at or above 2^31, negative values under floor and
// exact (−0 counts as 0), values at or below −1 under truncate, and
// fractions under exact.
func (m CategoryMatch) Category(v float64) (int32, bool) {
	switch m {
	case MatchTruncate:
		if v > -1 && v < MaxCategory {
			return int32(v), true // Go's conversion truncates toward zero
		}
	case MatchExact:
		if v >= 0 && v < MaxCategory && v == math.Trunc(v) {
			return int32(v), true
		}
	default: // MatchFloor and ""
		if v >= 0 && v < MaxCategory {
			return int32(v), true // v >= 0: truncation is the floor
		}
	}
	return 0, false
}

// IsMember reports whether v goes left at a set split listing cats (sorted)
// under m. v must not be missing (missing values are routed before).
func (m CategoryMatch) IsMember(v float64, cats []int32) bool {
	c, ok := m.Category(v)
	if !ok {
		return false
	}
	_, found := slices.BinarySearch(cats, c)
	return found
}

// ZeroMissingBound is the largest |v| that counts as missing at a node with
// zero_missing: the float32 nearest 1e-35, widened exactly.
const ZeroMissingBound = 1.0000000180025095e-35

// Precision is the precision of the inputs at each comparison.
type Precision string

const (
	Float64 Precision = "float64"
	// Float32 rounds every feature value to the nearest float32 before each
	// comparison; thresholds stay float64.
	Float32 Precision = "float32"
)

// Forest is a validated tree ensemble. Every Forest returned by Read, or
// accepted by Validate, satisfies the format's rules; code that builds one by
// hand must call Validate before using it.
type Forest struct {
	Task           Task
	Features       []string // input names, in input order; non-empty, unique
	Classes        []string // class labels for classification (at least 2); nil for regression
	InputPrecision Precision
	Combine        Combine
	Transform      Transform
	BaseScore      []float64 // length NumOutputs()
	Trees          []Tree

	// Version 2. The zero value of each field means what the key's absence
	// means, so a Forest built without them is a version 1 model.

	// Accumulate is the arithmetic of the joining and the transform:
	// Float32 (leaves must then be float32 values) or Float64 ("" means
	// Float64).
	Accumulate Precision
	// TransformScale s multiplies the joined score before the transform;
	// it must be finite and non-zero. 0 stands for the default, 1 (no
	// scaling); use Scale to read it.
	TransformScale float64
	// Outputs is the number of outputs of a regression model (0 stands for
	// the default, 1); it must be 0 for a classifier.
	Outputs int
	// CategoryMatch is how values meet set splits ("" means MatchFloor).
	CategoryMatch CategoryMatch
	// MissingValue, when HasMissingValue, is a (finite) number that counts
	// as missing wherever it appears as an input, after input rounding.
	HasMissingValue bool
	MissingValue    float64
	// Provenance is the free-form "provenance" object, kept byte for byte;
	// nil when the file had none.
	Provenance json.RawMessage
}

// Tree is one tree as parallel arrays indexed by node id; node 0 is the root.
// A node is a leaf exactly when Left[i] == -1 (and then Right[i] == -1).
type Tree struct {
	Feature     []int     // feature index at a split; -1 at a leaf
	Threshold   []float64 // x goes left when x <= Threshold[i]; finite at reachable splits
	Left        []int     // child ids; -1 at a leaf
	Right       []int
	MissingLeft []bool // where a missing value goes at a split
	// Value holds the node vectors back to back, Width(NumOutputs) entries
	// per node: node i's vector is Value[i*w : (i+1)*w]. Only leaves are read.
	Value []float64

	// Version 2.

	// HasOutput says the tree adds to one output only, Output (an index
	// below NumOutputs); its value vectors then have length 1.
	HasOutput bool
	Output    int
	// Categories is nil when every split is numeric; otherwise one entry
	// per node: nil for a numeric split, or, for a set split, the sorted,
	// distinct categories (in [0, MaxCategory)) whose values go left. A
	// non-nil empty list is a set split that sends every value right. The
	// threshold of a set split is ignored (and written as 0).
	Categories [][]int32
	// ZeroMissing is nil when no node treats zeros as missing; otherwise one
	// entry per node, true when |v| <= ZeroMissingBound also counts as
	// missing there.
	ZeroMissing []bool
}

// IsSetSplit reports whether node i tests membership in a set of categories.
func (t *Tree) IsSetSplit(i int) bool { return t.Categories != nil && t.Categories[i] != nil }

// Width is the length of the tree's value vectors in a model of k outputs:
// 1 for a tree with an output of its own, else k.
func (t *Tree) Width(k int) int {
	if t.HasOutput {
		return 1
	}
	return k
}

// AddsTo reports whether the tree's leaves add to output j.
func (t *Tree) AddsTo(j int) bool { return !t.HasOutput || t.Output == j }

// NumNodes is the number of node slots in the tree, reachable or not.
func (t *Tree) NumNodes() int { return len(t.Left) }

// IsLeaf reports whether node i is a leaf.
func (t *Tree) IsLeaf(i int) bool { return t.Left[i] == -1 }

// Leaf returns node i's value vector for a model with k outputs (a vector
// of length 1 in a tree with HasOutput).
func (t *Tree) Leaf(i, k int) []float64 {
	w := t.Width(k)
	return t.Value[i*w : (i+1)*w : (i+1)*w]
}

// NumOutputs is the length of Predict's output: Outputs (default 1) for
// regression, 1 for a binary classifier with a logistic transform, else the
// number of classes.
func (f *Forest) NumOutputs() int {
	return numOutputs(f.Task, len(f.Classes), f.Transform, f.Outputs)
}

func numOutputs(task Task, classes int, tr Transform, outputs int) int {
	if task == Regression {
		return max(outputs, 1)
	}
	if tr == Logistic {
		return 1
	}
	return classes
}

// Scale is the transform scale s: TransformScale, or 1 when it is 0.
func (f *Forest) Scale() float64 {
	if f.TransformScale == 0 {
		return 1
	}
	return f.TransformScale
}

// Float32Accumulate reports whether the joining and the transform are
// computed in float32 arithmetic ("accumulate": "float32").
func (f *Forest) Float32Accumulate() bool { return f.Accumulate == Float32 }

// Version is the format version a writer gives the model: 2 when it uses
// anything of version 2 (see V2Constructs), else 1.
func (f *Forest) Version() int {
	if len(f.V2Constructs()) > 0 {
		return 2
	}
	return 1
}

// V2Constructs names the version 2 constructs the model uses, by their keys
// in the file ("accumulate", "output_transform exp", "transform_scale",
// "outputs", "category_match", "missing_value", "trees[].output",
// "trees[].categories", "trees[].zero_missing"), in that order; empty for a
// version 1 model.
func (f *Forest) V2Constructs() []string {
	var out []string
	if f.Accumulate == Float32 {
		out = append(out, "accumulate")
	}
	switch f.Transform {
	case Exp, LogisticEach, Normalize:
		out = append(out, "output_transform "+string(f.Transform))
	}
	if f.Scale() != 1 {
		out = append(out, "transform_scale")
	}
	if f.Outputs > 1 {
		out = append(out, "outputs")
	}
	if f.CategoryMatch != "" && f.CategoryMatch != MatchFloor {
		out = append(out, "category_match")
	}
	if f.HasMissingValue {
		out = append(out, "missing_value")
	}
	var output, cats, zeros bool
	for i := range f.Trees {
		t := &f.Trees[i]
		output = output || t.HasOutput
		cats = cats || t.Categories != nil
		zeros = zeros || t.ZeroMissing != nil
	}
	if output {
		out = append(out, "trees[].output")
	}
	if cats {
		out = append(out, "trees[].categories")
	}
	if zeros {
		out = append(out, "trees[].zero_missing")
	}
	return out
}

// IsClassifier reports whether the model predicts a class.
func (f *Forest) IsClassifier() bool { return f.Task == Classification }

// ClassOf returns the predicted class index for an output vector, per step 4
// of the format's "Meaning": argmax with ties to the lowest index, or, for a
// single logistic output, class 1 when the output is above 0.5 (version 2
// changes nothing: logistic_each has an output per class and takes the
// argmax).
func (f *Forest) ClassOf(out []float64) int {
	if len(out) == 1 && f.Task == Classification {
		if out[0] > 0.5 {
			return 1
		}
		return 0
	}
	return Argmax(out)
}

// Argmax is the index of the largest entry, ties to the lowest index. An entry
// wins only by comparing greater, so a NaN never displaces an earlier entry.
func Argmax(v []float64) int {
	best := 0
	for i := 1; i < len(v); i++ {
		if v[i] > v[best] {
			best = i
		}
	}
	return best
}

// Round32 is the value a float32 model compares: x rounded to the nearest
// float32 (ties to even, overflow to ±Inf, as IEEE 754 prescribes), widened
// back to float64 exactly.
func Round32(x float64) float64 { return float64(float32(x)) }

// Missing reports whether x stands for a missing value.
func Missing(x float64) bool { return math.IsNaN(x) }
