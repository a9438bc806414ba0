// Package forest holds sawmill's model type: a tree ensemble as described by
// the forest file format (format version 1), its JSON codec and validation,
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
)

// FormatVersion is the only value of "sawmill_forest" this reader accepts.
const FormatVersion = 1

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
)

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
	// Value holds the node vectors back to back, NumOutputs entries per node:
	// node i's vector is Value[i*k : (i+1)*k]. Only leaves are read.
	Value []float64
}

// NumNodes is the number of node slots in the tree, reachable or not.
func (t *Tree) NumNodes() int { return len(t.Left) }

// IsLeaf reports whether node i is a leaf.
func (t *Tree) IsLeaf(i int) bool { return t.Left[i] == -1 }

// Leaf returns node i's value vector for a model with k outputs.
func (t *Tree) Leaf(i, k int) []float64 { return t.Value[i*k : (i+1)*k : (i+1)*k] }

// NumOutputs is the length of Predict's output: 1 for regression, 1 for a
// binary classifier with a logistic transform, else the number of classes.
func (f *Forest) NumOutputs() int {
	return numOutputs(f.Task, len(f.Classes), f.Transform)
}

func numOutputs(task Task, classes int, tr Transform) int {
	if task == Regression {
		return 1
	}
	if tr == Logistic {
		return 1
	}
	return classes
}

// IsClassifier reports whether the model predicts a class.
func (f *Forest) IsClassifier() bool { return f.Task == Classification }

// ClassOf returns the predicted class index for an output vector, per step 4
// of the format's "Meaning": argmax with ties to the lowest index, or, for a
// single logistic output, class 1 when the output is above 0.5.
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
