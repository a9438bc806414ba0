package source

// TreeEnsemble of ai.onnx.ml opset 5 (docs/Operators-ml.md of ONNX 1.23.2):
// splits and leaves in separate arrays, tree_roots naming each tree's first
// split, nodes_modes as a uint8 tensor (0 BRANCH_LEQ, 1 BRANCH_LT,
// 2 BRANCH_GTE, 3 BRANCH_GT, 4 BRANCH_EQ, 5 BRANCH_NEQ, 6 BRANCH_MEMBER),
// thresholds and leaf weights as tensors of the input's type, one target and
// weight per leaf, the members of every BRANCH_MEMBER node in one tensor
// with the sets separated by NaN, and aggregate_function and post_transform
// as integers (0 AVERAGE, 1 SUM, 2 MIN, 3 MAX; 0 NONE, 1 SOFTMAX,
// 2 LOGISTIC, 3 SOFTMAX_ZERO, 4 PROBIT). ONNX Runtime 1.31.1 turns it into
// the opset-3 operator before it runs it, so it is read into the same trees
// and follows the same rules (measured on the hand-built fixtures); a
// membership set of whole numbers in [0, 2^31) becomes a set split under
// category_match exact, and any other set is refused. post_transform 1
// (SOFTMAX) and 2 (LOGISTIC) are refused: ONNX Runtime 1.31.1 swaps them
// (measured), so the standard and the runtime disagree on such a model.

import (
	"fmt"
	"math"
	"slices"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/source/internal/onnxpb"
)

// onnxV5 is a TreeEnsemble node's attributes.
type onnxV5 struct {
	roots, featureIDs, trueIDs, falseIDs, trueLeaf, falseLeaf, missingTrue []int64
	modes                                                                  []byte
	splits                                                                 []float32
	leafTargets                                                            []int64
	leafWeights                                                            []float32
	members                                                                []float32
	hasMembers                                                             bool
}

var onnxV5Modes = []string{"BRANCH_LEQ", "BRANCH_LT", "BRANCH_GTE", "BRANCH_GT", "BRANCH_EQ", "BRANCH_NEQ", "BRANCH_MEMBER"}

var (
	onnxV5Aggregates = []string{"AVERAGE", "SUM", "MIN", "MAX"}
	onnxV5Transforms = []string{"NONE", "SOFTMAX", "LOGISTIC", "SOFTMAX_ZERO", "PROBIT"}
)

// onnxAttributesV5 reads a TreeEnsemble node's attributes into e.
func onnxAttributesV5(n *onnxpb.NodeProto, e *onnxEnsemble, name, at string) error {
	v := &onnxV5{}
	e.v5 = v
	e.nTargets = -1
	seen := map[string]bool{}
	for _, a := range n.GetAttribute() {
		k := a.GetName()
		if seen[k] {
			return onnxErr(name, "%s: attribute %s given twice", at, onnxIdent(k))
		}
		seen[k] = true
		var err error
		switch k {
		case "tree_roots":
			v.roots, err = onnxInts(a)
		case "nodes_featureids":
			v.featureIDs, err = onnxInts(a)
		case "nodes_truenodeids":
			v.trueIDs, err = onnxInts(a)
		case "nodes_falsenodeids":
			v.falseIDs, err = onnxInts(a)
		case "nodes_trueleafs":
			v.trueLeaf, err = onnxInts(a)
		case "nodes_falseleafs":
			v.falseLeaf, err = onnxInts(a)
		case "nodes_missing_value_tracks_true":
			v.missingTrue, err = onnxInts(a)
		case "nodes_modes":
			v.modes, err = onnxUint8Tensor(a)
		case "nodes_splits":
			v.splits, err = onnxFloats(a, seen, "")
		case "leaf_targetids":
			v.leafTargets, err = onnxInts(a)
		case "leaf_weights":
			v.leafWeights, err = onnxFloats(a, seen, "")
		case "membership_values":
			v.members, err = onnxFloats(a, seen, "")
			v.hasMembers = true
		case "nodes_hitrates":
			// Hints for the runtime; they do not change a score.
		case "n_targets":
			e.nTargets = a.GetI()
		case "aggregate_function":
			i := a.GetI()
			if i < 0 || i >= int64(len(onnxV5Aggregates)) {
				return onnxErr(name, "%s: aggregate_function %d is not one of 0 to 3", at, i)
			}
			e.aggregate = onnxV5Aggregates[i]
		case "post_transform":
			i := a.GetI()
			if i < 0 || i >= int64(len(onnxV5Transforms)) {
				return onnxErr(name, "%s: post_transform %d is not one of 0 to 4", at, i)
			}
			e.post = onnxV5Transforms[i]
			if i == 1 || i == 2 {
				// Measured (scripts/onnx_fixtures.py, hand-v5-*): onnxruntime
				// 1.31.1 applies its LOGISTIC where the standard's 1 says
				// SOFTMAX, and its SOFTMAX for 2, LOGISTIC. Which one a
				// user expects is not sawmill's to guess.
				return onnxErr(name, "%s: post_transform %d (%s in the ONNX standard): ONNX Runtime 1.31.1 applies %s instead, so the model has two meanings and sawmill reads neither\nhint: convert with post_transform NONE and apply the transform yourself, or to TreeEnsembleRegressor (ai.onnx.ml opset 3)",
					at, i, e.post, onnxV5Transforms[3-i])
			}
		default:
			return onnxErr(name, "%s: attribute %s is not read; it may change the scores", at, onnxIdent(k))
		}
		if err != nil {
			return onnxErr(name, "%s: attribute %s: %v", at, k, err)
		}
	}
	if e.nTargets < 0 {
		return onnxErr(name, "%s: n_targets is missing", at)
	}
	e.size = len(v.modes) + len(v.leafWeights)
	e.weights = v.leafWeights
	return nil
}

// onnxUint8Tensor reads a tensor of uint8 (int32_data or raw_data).
func onnxUint8Tensor(a *onnxpb.AttributeProto) ([]byte, error) {
	t := a.GetT()
	if a.GetType() != onnxpb.AttributeProto_TENSOR || t == nil {
		return nil, fmt.Errorf("is of type %v, not TENSOR", a.GetType())
	}
	if dt := onnxpb.TensorProto_DataType(t.GetDataType()); dt != onnxpb.TensorProto_UINT8 {
		return nil, fmt.Errorf("is a tensor of %v, not UINT8", dt)
	}
	if t.RawData != nil {
		return t.GetRawData(), nil
	}
	out := make([]byte, len(t.GetInt32Data()))
	for i, v := range t.GetInt32Data() {
		if v < 0 || v > 255 {
			return nil, fmt.Errorf("entry %d is %d, not a uint8", i, v)
		}
		out[i] = byte(v)
	}
	return out, nil
}

// treesV5 builds the trees of a TreeEnsemble, in tree_roots order, each
// split and leaf reached from exactly one parent.
func (e *onnxEnsemble) treesV5(name string, k int) ([]onnxTree, int, error) {
	v := e.v5
	n := len(v.modes)
	if n == 0 {
		return nil, 0, onnxErr(name, "%s: the ensemble has no nodes", e.op)
	}
	if err := e.perNode(name, "nodes_modes", n, v.missingTrue, []onnxLen{{"nodes_featureids", len(v.featureIDs)}, {"nodes_splits", len(v.splits)},
		{"nodes_truenodeids", len(v.trueIDs)}, {"nodes_falsenodeids", len(v.falseIDs)}, {"nodes_trueleafs", len(v.trueLeaf)}, {"nodes_falseleafs", len(v.falseLeaf)}}); err != nil {
		return nil, 0, err
	}
	if len(v.leafTargets) != len(v.leafWeights) {
		return nil, 0, onnxErr(name, "%s: leaf_targetids has %d entries, leaf_weights %d: one per leaf", e.op, len(v.leafTargets), len(v.leafWeights))
	}
	// The members of each BRANCH_MEMBER node, in node order.
	sets := make(map[int][]int32)
	rest := v.members
	for i, m := range v.modes {
		if m != 6 {
			continue
		}
		end := slices.IndexFunc(rest, func(x float32) bool { return x != x })
		if end < 0 {
			end = len(rest)
		}
		var set []int32
		for _, x := range rest[:end] {
			fx := float64(x)
			if fx != math.Trunc(fx) || fx < 0 || fx >= forest.MaxCategory {
				return nil, 0, onnxErr(name, "node %d: BRANCH_MEMBER of %v: sawmill reads sets of whole numbers in [0, 2^31) only", i, x)
			}
			set = append(set, int32(fx))
		}
		if len(set) == 0 {
			return nil, 0, onnxErr(name, "node %d: BRANCH_MEMBER with no members (ONNX Runtime refuses it too)", i)
		}
		slices.Sort(set)
		sets[i] = slices.Compact(set)
		if end < len(rest) {
			end++
		}
		rest = rest[end:]
	}
	if len(rest) > 0 {
		return nil, 0, onnxErr(name, "%s: membership_values holds more sets than there are BRANCH_MEMBER nodes", e.op)
	}
	usedNode := make([]bool, n)
	usedLeaf := make([]bool, len(v.leafWeights))
	maxFeature := -1
	var trees []onnxTree
	type ref struct {
		leaf bool
		idx  int64
	}
	for ti, r := range v.roots {
		if r < 0 || r >= int64(n) {
			return nil, 0, onnxErr(name, "tree %d: tree_roots names node %d, outside [0, %d)", ti, r, n)
		}
		t := onnxTree{id: int64(ti)}
		// Breadth first; each ref gets the next index of t.nodes.
		queue := []ref{{false, r}}
		for q := 0; q < len(queue); q++ {
			cur := queue[q]
			if cur.leaf {
				if cur.idx < 0 || cur.idx >= int64(len(v.leafWeights)) {
					return nil, 0, onnxErr(name, "tree %d: leaf %d is outside [0, %d)", ti, cur.idx, len(v.leafWeights))
				}
				if usedLeaf[cur.idx] {
					return nil, 0, onnxErr(name, "tree %d, leaf %d: reached twice (a leaf shared by two parents)", ti, cur.idx)
				}
				usedLeaf[cur.idx] = true
				c, w := v.leafTargets[cur.idx], v.leafWeights[cur.idx]
				if c < 0 || c >= int64(k) {
					return nil, 0, onnxErr(name, "tree %d, leaf %d: target id %d is out of range [0, %d)", ti, cur.idx, c, k)
				}
				if math.IsNaN(float64(w)) || math.IsInf(float64(w), 0) {
					return nil, 0, onnxErr(name, "tree %d, leaf %d: weight is %v", ti, cur.idx, w)
				}
				t.nodes = append(t.nodes, onnxNode{id: cur.idx, mode: "LEAF", feature: -1, trueChild: -1, falseChild: -1,
					leaf: []onnxWeight{{target: int(c), w: w}}})
				continue
			}
			i := cur.idx
			if i < 0 || i >= int64(n) {
				return nil, 0, onnxErr(name, "tree %d: node %d is outside [0, %d)", ti, i, n)
			}
			if usedNode[i] {
				return nil, 0, onnxErr(name, "tree %d, node %d: reached twice (a cycle, or a node shared by two parents)", ti, i)
			}
			usedNode[i] = true
			m := v.modes[i]
			if int(m) >= len(onnxV5Modes) {
				return nil, 0, onnxErr(name, "tree %d, node %d: unknown node mode %d", ti, i, m)
			}
			nd := onnxNode{id: i, mode: onnxV5Modes[m], value: v.splits[i], set: sets[int(i)]}
			var err error
			nd.feature, nd.missingTrue, err = onnxSplit(name, int64(ti), i, v.featureIDs[i], nd.value, m == 6, v.missingTrue, int(i))
			if err != nil {
				return nil, 0, err
			}
			maxFeature = max(maxFeature, nd.feature)
			nd.trueChild = len(queue)
			queue = append(queue, ref{v.trueLeaf[i] != 0, v.trueIDs[i]})
			nd.falseChild = len(queue)
			queue = append(queue, ref{v.falseLeaf[i] != 0, v.falseIDs[i]})
			t.nodes = append(t.nodes, nd)
		}
		trees = append(trees, t)
	}
	if len(trees) == 0 {
		return nil, 0, onnxErr(name, "%s: tree_roots is empty", e.op)
	}
	return trees, maxFeature + 1, nil
}
