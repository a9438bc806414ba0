package source

// The ONNX-ML reader: a ModelProto (.onnx file) whose graph is one
// TreeEnsembleRegressor or TreeEnsembleClassifier of the ai.onnx.ml domain
// (opsets 1 to 3), or one TreeEnsemble (opset 5, onnx_v5.go), with a single
// float input tensor before it and nothing but Cast, ZipMap, Identity and a
// multiplication by 1 after it. The schema is ONNX's own (the bindings
// in internal/onnxpb are generated from onnx-ml.proto of ONNX 1.23.2), and the
// operators' meaning is the ai.onnx.ml operator documentation
// (docs/Operators-ml.md of ONNX) as ONNX Runtime computes it. What follows was
// measured with onnxruntime 1.31.1 on one thread
// (scripts/onnx_fixtures.py, testdata/onnx), not taken from the documentation:
//
//   - The input is a float tensor, so every value is float32 before it is
//     compared, and the thresholds (nodes_values, or a float
//     nodes_values_as_tensor) are float32: input_precision float32 makes
//     every comparison exact. A double nodes_values_as_tensor with a float
//     input is refused by ONNX Runtime ("could not unpack tensor attribute"),
//     and so here. BRANCH_LEQ is x <= t; BRANCH_LT becomes x <= the largest
//     float32 below t; BRANCH_GT and BRANCH_GTE are those with the children
//     swapped; BRANCH_EQ and BRANCH_NEQ become a set split under
//     category_match exact when t is an integer in [0, 2^31), else two
//     numeric splits (the subtree on the "not equal" side of the first is
//     copied: sawmill's trees are trees).
//   - A NaN goes to the true child when nodes_missing_value_tracks_true is 1
//     for the node; otherwise it takes the comparison's answer, which is
//     false for every mode but BRANCH_NEQ (NaN != t is true).
//   - Trees are added in the order their first nodes appear in
//     nodes_treeids (not by tree id), each leaf's weights in float32 from
//     zero, target by target. SUM adds base_values after the trees
//     (measured: 3 + 3 + 1e8 and not 1e8 + 3 + 3); sawmill's sum starts at
//     the base score, so the base values become one last tree of a single
//     leaf per output, which adds them in the same place. AVERAGE divides
//     the float32 sum by the number of trees and then adds base_values, as
//     format 2's average does.
//   - A classifier of two labels whose weights all go to class 0 is ONNX
//     Runtime's "binary case": it computes one score s (with base_values[0])
//     and outputs [-s, s] under NONE, and also under SOFTMAX and
//     SOFTMAX_ZERO, which it does not apply there; under LOGISTIC it outputs
//     [1-p, p] with p = logistic(s): sawmill's single logistic output p, the
//     probability of the second label. Any other classifier has an output per
//     label (labels without weights stay 0).
//   - post_transform NONE, LOGISTIC (one output; logistic_each for several)
//     and SOFTMAX are format 2's transforms; ONNX Runtime computes the last
//     two with its own vectorised approximations, so they agree to a few
//     float32 steps, not bit for bit (see onnx_test.go for the bound).
//     SOFTMAX_ZERO and PROBIT have no counterpart in format 2 and are
//     refused, as are aggregate_function MIN and MAX.

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/source/internal/onnxpb"
)

var onnxFormat = Format{
	Name:     "onnx",
	Describe: "ONNX-ML model file (.onnx): TreeEnsembleRegressor or TreeEnsembleClassifier (ai.onnx.ml opsets 1 to 3) or TreeEnsemble (opset 5)",
	Detect:   detectONNX,
	Read:     readONNX,
}

// onnxMLDomain is the domain of ONNX's classical machine-learning operators.
const onnxMLDomain = "ai.onnx.ml"

// detectONNX accepts a protobuf message whose first field is ModelProto's
// ir_version (field 1, a varint, which every writer puts first), whose top
// level parses as protobuf fields, that has a graph (field 7), and that names
// the ai.onnx.ml domain and a TreeEnsemble operator somewhere. It reads only
// the top-level field headers.
func detectONNX(data []byte) bool {
	if len(data) < 2 || data[0] != 0x08 {
		return false
	}
	graph := false
	for b := data; len(b) > 0; {
		num, typ, n := protowire.ConsumeTag(b)
		if n < 0 {
			return false
		}
		m := protowire.ConsumeFieldValue(num, typ, b[n:])
		if m < 0 {
			return false
		}
		if num == 7 && typ == protowire.BytesType {
			graph = true
		}
		b = b[n+m:]
	}
	return graph && bytes.Contains(data, []byte(onnxMLDomain)) && bytes.Contains(data, []byte("TreeEnsemble"))
}

// onnxIdent is a name from the file as a message shows it: as it is when it
// is a short run of letters, digits, '_' and '.', else quoted (and clipped).
func onnxIdent(s string) string {
	ok := len(s) > 0 && len(s) <= 64
	for _, r := range s {
		ok = ok && (r == '_' || r == '.' || (r >= 'a' && r <= 'z') || (r >= 'A' && r <= 'Z') || (r >= '0' && r <= '9'))
	}
	if ok {
		return s
	}
	return strconv.Quote(clip([]byte(s)))
}

// onnxErr prefixes a message with the file's name.
func onnxErr(name, format string, a ...any) error {
	return fmt.Errorf("%s: %s", name, fmt.Sprintf(format, a...))
}

// readONNX decodes the ModelProto, checks the graph around the ensemble and
// converts the ensemble.
func readONNX(data []byte, name string, o Options) (*Result, error) {
	var m onnxpb.ModelProto
	// The protobuf library checks every declared length against the bytes
	// left, so a length bomb fails here before anything is allocated for
	// it; repeated fields grow with the bytes that hold them. A tree
	// ensemble's file nests messages 5 deep (model, graph, node, attribute,
	// tensor); graphs inside attributes (control flow) are not read, so 32
	// levels are plenty and no file can make the decoder recurse deeper.
	if err := (proto.UnmarshalOptions{DiscardUnknown: true, RecursionLimit: 32}).Unmarshal(data, &m); err != nil {
		return nil, onnxErr(name, "not a readable ONNX model: %v\nhint: the file is truncated or damaged; export the model again", err)
	}
	ml := int64(-1)
	for _, op := range m.GetOpsetImport() {
		if op.GetDomain() == onnxMLDomain {
			ml = op.GetVersion()
		}
	}
	g := m.GetGraph()
	if g == nil {
		return nil, onnxErr(name, "the model has no graph")
	}
	ens, input, err := onnxGraph(g, name)
	if err != nil {
		return nil, err
	}
	switch {
	case ens.GetOpType() == "TreeEnsemble" && ml < 5:
		return nil, onnxErr(name, "graph node %q: TreeEnsemble needs ai.onnx.ml opset 5 or later, the model imports %d", ens.GetName(), ml)
	case ens.GetOpType() != "TreeEnsemble" && (ml < 1 || ml > 4):
		return nil, onnxErr(name, "graph node %q: %s of ai.onnx.ml opset %d is not read; sawmill reads it from opsets 1 to 4 (its last version is 3), and TreeEnsemble from opset 5", ens.GetName(), ens.GetOpType(), ml)
	}
	nf, err := onnxInputWidth(input, name)
	if err != nil {
		return nil, err
	}
	e, err := onnxAttributes(ens, name)
	if err != nil {
		return nil, err
	}
	r, err := e.forest(name, nf, int64(len(data)), o)
	if err != nil {
		return nil, err
	}
	prov := map[string]any{
		"source":          "onnx",
		"operator":        ens.GetOpType(),
		"ai.onnx.ml":      ml,
		"producer":        strings.TrimSpace(m.GetProducerName() + " " + m.GetProducerVersion()),
		"post_transform":  e.post,
		"aggregate":       e.aggregate,
		"ensemble_node":   ens.GetName(),
		"onnx_ir_version": m.GetIrVersion(),
	}
	pj, err := json.Marshal(prov)
	if err != nil {
		panic("BUG: provenance: " + err.Error())
	}
	r.Forest.Provenance = pj
	if err := r.Forest.Validate(name); err != nil {
		return nil, err
	}
	return r, nil
}

// onnxGraph finds the one tree-ensemble node and the graph input it reads,
// and refuses every other node but Cast, ZipMap and Identity after it.
func onnxGraph(g *onnxpb.GraphProto, name string) (*onnxpb.NodeProto, *onnxpb.ValueInfoProto, error) {
	inits := map[string]*onnxpb.TensorProto{}
	for _, t := range g.GetInitializer() {
		inits[t.GetName()] = t
	}
	var inputs []*onnxpb.ValueInfoProto
	for _, in := range g.GetInput() {
		if inits[in.GetName()] == nil {
			inputs = append(inputs, in)
		}
	}
	if len(inputs) != 1 {
		return nil, nil, onnxErr(name, "the graph has %d inputs; sawmill reads a graph of one float input tensor", len(inputs))
	}
	var ens *onnxpb.NodeProto
	// after holds the names of values computed from the ensemble's outputs.
	after := map[string]bool{}
	for i, n := range g.GetNode() {
		at := fmt.Sprintf("graph node %d %q (op %s)", i, n.GetName(), onnxIdent(n.GetOpType()))
		dom := n.GetDomain()
		switch {
		case dom == onnxMLDomain && strings.HasPrefix(n.GetOpType(), "TreeEnsemble"):
			if ens != nil {
				return nil, nil, onnxErr(name, "%s: a second tree ensemble; sawmill reads a graph of one", at)
			}
			if len(n.GetInput()) != 1 || n.GetInput()[0] != inputs[0].GetName() {
				return nil, nil, onnxErr(name, "%s: its input is not the graph's input %q; sawmill reads an ensemble applied to the input directly", at, inputs[0].GetName())
			}
			ens = n
			for _, out := range n.GetOutput() {
				after[out] = true
			}
		case (dom == onnxMLDomain && n.GetOpType() == "ZipMap") || ((dom == "" || dom == "ai.onnx") && (n.GetOpType() == "Cast" || n.GetOpType() == "Identity")):
			for _, in := range n.GetInput() {
				if !after[in] {
					return nil, nil, onnxErr(name, "%s: reads %q, which does not come from the tree ensemble; sawmill reads only Cast, ZipMap and Identity after the ensemble", at, in)
				}
			}
			if n.GetOpType() == "Cast" {
				to := onnxpb.TensorProto_DataType(0)
				for _, a := range n.GetAttribute() {
					if a.GetName() == "to" {
						to = onnxpb.TensorProto_DataType(a.GetI())
					}
				}
				switch to {
				case onnxpb.TensorProto_FLOAT, onnxpb.TensorProto_DOUBLE, onnxpb.TensorProto_INT64, onnxpb.TensorProto_INT32, onnxpb.TensorProto_STRING:
				default:
					return nil, nil, onnxErr(name, "%s: casts to %v, which would change the scores; sawmill reads Casts to float, double, int32, int64 or string", at, to)
				}
			}
			for _, out := range n.GetOutput() {
				after[out] = true
			}
		case (dom == "" || dom == "ai.onnx") && n.GetOpType() == "Mul" && len(n.GetInput()) == 2 && onnxIsOne(inits[n.GetInput()[1]]) && after[n.GetInput()[0]]:
			// onnxmltools 1.16.0 writes LightGBM classifiers with their
			// probabilities multiplied by a constant 1: x*1 is x exactly.
			for _, out := range n.GetOutput() {
				after[out] = true
			}
		default:
			return nil, nil, onnxErr(name, "%s: not read; sawmill reads one TreeEnsembleRegressor or TreeEnsembleClassifier on the graph's input, with only Cast, ZipMap, Identity or a multiplication by 1 after it", at)
		}
	}
	if ens == nil {
		return nil, nil, onnxErr(name, "the graph has no TreeEnsembleRegressor or TreeEnsembleClassifier node of domain ai.onnx.ml")
	}
	switch ens.GetOpType() {
	case "TreeEnsembleRegressor", "TreeEnsembleClassifier", "TreeEnsemble":
	default:
		return nil, nil, onnxErr(name, "graph node %q: unknown operator %s", ens.GetName(), onnxIdent(ens.GetOpType()))
	}
	return ens, inputs[0], nil
}

// onnxIsOne reports whether t is a float tensor of one element, 1.
func onnxIsOne(t *onnxpb.TensorProto) bool {
	if t == nil || onnxpb.TensorProto_DataType(t.GetDataType()) != onnxpb.TensorProto_FLOAT {
		return false
	}
	for _, d := range t.GetDims() {
		if d != 1 {
			return false
		}
	}
	if raw := t.GetRawData(); t.RawData != nil {
		return len(raw) == 4 && math.Float32frombits(binary.LittleEndian.Uint32(raw)) == 1
	}
	return len(t.GetFloatData()) == 1 && t.GetFloatData()[0] == 1
}

// onnxInputWidth returns the number of features the input tensor declares
// (its last dimension), or 0 when the shape does not say.
func onnxInputWidth(in *onnxpb.ValueInfoProto, name string) (int, error) {
	tt := in.GetType().GetTensorType()
	if tt == nil {
		return 0, onnxErr(name, "input %q is not a tensor; sawmill reads one float input tensor", in.GetName())
	}
	if et := onnxpb.TensorProto_DataType(tt.GetElemType()); et != onnxpb.TensorProto_FLOAT {
		return 0, onnxErr(name, "input %q is a tensor of %v; sawmill reads a float input tensor\nhint: convert the model with a float (FloatTensorType) input", in.GetName(), et)
	}
	dims := tt.GetShape().GetDim()
	if len(dims) != 2 {
		return 0, nil
	}
	if d, ok := dims[1].GetValue().(*onnxpb.TensorShapeProto_Dimension_DimValue); ok {
		if d.DimValue < 1 || d.DimValue > 1<<24 {
			return 0, onnxErr(name, "input %q declares %d features", in.GetName(), d.DimValue)
		}
		return int(d.DimValue), nil
	}
	return 0, nil
}

// onnxEnsemble is a tree-ensemble node's attributes, regressor and classifier
// alike (the classifier's class_* arrays are the regressor's target_*).
type onnxEnsemble struct {
	op         string
	classifier bool

	treeIDs, nodeIDs, featureIDs, trueIDs, falseIDs, missingTrue []int64
	modes                                                        []string
	values                                                       []float32

	wTree, wNode, wTarget []int64
	weights               []float32

	nTargets  int64
	labels    []string
	v5        *onnxV5 // TreeEnsemble (opset 5): its own node arrays
	size      int     // nodes and leaves in the file
	base      []float32
	post      string
	aggregate string
}

// onnxAttributes reads the ensemble node's attributes, refusing unknown ones.
func onnxAttributes(n *onnxpb.NodeProto, name string) (*onnxEnsemble, error) {
	e := &onnxEnsemble{op: n.GetOpType(), classifier: n.GetOpType() == "TreeEnsembleClassifier", post: "NONE", aggregate: "SUM"}
	at := fmt.Sprintf("%s %q", e.op, n.GetName())
	if e.op == "TreeEnsemble" {
		if err := onnxAttributesV5(n, e, name, at); err != nil {
			return nil, err
		}
		return e, nil
	}
	w := "target_"
	if e.classifier {
		w = "class_"
	}
	seen := map[string]bool{}
	var intLabels []int64
	var strLabels [][]byte
	for _, a := range n.GetAttribute() {
		k := a.GetName()
		if seen[k] {
			return nil, onnxErr(name, "%s: attribute %s given twice", at, onnxIdent(k))
		}
		seen[k] = true
		var err error
		switch k {
		case "nodes_treeids":
			e.treeIDs, err = onnxInts(a)
		case "nodes_nodeids":
			e.nodeIDs, err = onnxInts(a)
		case "nodes_featureids":
			e.featureIDs, err = onnxInts(a)
		case "nodes_truenodeids":
			e.trueIDs, err = onnxInts(a)
		case "nodes_falsenodeids":
			e.falseIDs, err = onnxInts(a)
		case "nodes_missing_value_tracks_true":
			e.missingTrue, err = onnxInts(a)
		case "nodes_modes":
			for _, s := range a.GetStrings() {
				e.modes = append(e.modes, string(s))
			}
		case "nodes_values", "nodes_values_as_tensor":
			e.values, err = onnxFloats(a, seen, "nodes_values")
		case "nodes_hitrates", "nodes_hitrates_as_tensor":
			// Hit rates are hints for the runtime; they do not change a score.
		case w + "treeids":
			e.wTree, err = onnxInts(a)
		case w + "nodeids":
			e.wNode, err = onnxInts(a)
		case w + "ids":
			e.wTarget, err = onnxInts(a)
		case w + "weights", w + "weights_as_tensor":
			e.weights, err = onnxFloats(a, seen, w+"weights")
		case "base_values", "base_values_as_tensor":
			e.base, err = onnxFloats(a, seen, "base_values")
		case "post_transform":
			e.post = string(a.GetS())
		case "aggregate_function":
			if e.classifier {
				return nil, onnxErr(name, "%s: attribute aggregate_function is not one of TreeEnsembleClassifier's", at)
			}
			e.aggregate = string(a.GetS())
		case "n_targets":
			if e.classifier {
				return nil, onnxErr(name, "%s: attribute n_targets is not one of TreeEnsembleClassifier's", at)
			}
			e.nTargets = a.GetI()
		case "classlabels_int64s":
			intLabels, err = onnxInts(a)
		case "classlabels_strings":
			strLabels = a.GetStrings()
		default:
			return nil, onnxErr(name, "%s: attribute %s is not read; it may change the scores", at, onnxIdent(k))
		}
		if err != nil {
			return nil, onnxErr(name, "%s: attribute %s: %v", at, k, err)
		}
	}
	if e.classifier {
		switch {
		case intLabels != nil && strLabels != nil:
			return nil, onnxErr(name, "%s: both classlabels_int64s and classlabels_strings are given", at)
		case intLabels != nil:
			for _, l := range intLabels {
				e.labels = append(e.labels, strconv.FormatInt(l, 10))
			}
		default:
			for _, l := range strLabels {
				e.labels = append(e.labels, string(l))
			}
		}
		if len(e.labels) < 2 {
			return nil, onnxErr(name, "%s: %d class labels; a classifier has at least two", at, len(e.labels))
		}
	}
	return e, nil
}

// onnxInts reads a list of integers.
func onnxInts(a *onnxpb.AttributeProto) ([]int64, error) {
	if a.GetType() != onnxpb.AttributeProto_INTS {
		return nil, fmt.Errorf("is of type %v, not INTS", a.GetType())
	}
	return a.GetInts(), nil
}

// onnxFloats reads a list of float32 numbers: FLOATS, or, for the
// *_as_tensor form (once only of the two), a float tensor. ONNX Runtime 1.31.1
// refuses a double tensor where the input is float ("could not unpack tensor
// attribute"), and so does this reader.
func onnxFloats(a *onnxpb.AttributeProto, seen map[string]bool, plain string) ([]float32, error) {
	if seen[plain] && seen[plain+"_as_tensor"] {
		return nil, fmt.Errorf("both %s and %s_as_tensor are given", plain, plain)
	}
	if a.GetName() == plain {
		if a.GetType() != onnxpb.AttributeProto_FLOATS {
			return nil, fmt.Errorf("is of type %v, not FLOATS", a.GetType())
		}
		return a.GetFloats(), nil
	}
	if a.GetType() != onnxpb.AttributeProto_TENSOR || a.GetT() == nil {
		return nil, fmt.Errorf("is of type %v, not TENSOR", a.GetType())
	}
	t := a.GetT()
	if dt := onnxpb.TensorProto_DataType(t.GetDataType()); dt != onnxpb.TensorProto_FLOAT {
		return nil, fmt.Errorf("is a tensor of %v; with a float input the thresholds and weights are float (ONNX Runtime refuses this model too)\nhint: convert the model with float thresholds", dt)
	}
	if t.RawData != nil {
		raw := t.GetRawData()
		if len(raw)%4 != 0 {
			return nil, fmt.Errorf("raw_data of %d bytes is not a whole number of floats", len(raw))
		}
		out := make([]float32, len(raw)/4)
		for i := range out {
			out[i] = math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
		}
		return out, nil
	}
	return t.GetFloatData(), nil
}

// onnxNode is one node of one tree, after checking.
type onnxNode struct {
	id          int64 // the node id in the file
	mode        string
	feature     int
	value       float32
	trueChild   int // index into the tree's nodes; -1 at a leaf
	falseChild  int
	missingTrue bool
	leaf        []onnxWeight
	set         []int32 // BRANCH_MEMBER (opset 5): the sorted members
}

// onnxWeight is one weight of a leaf.
type onnxWeight struct {
	target int
	w      float32
}

// onnxTree is one tree's nodes; nodes[0] is the root.
type onnxTree struct {
	id    int64
	nodes []onnxNode
	index onnxIndex
}

// onnxIndex maps a tree's node ids to their places in the tree: a slice
// while the ids are below the tree's size (as every converter numbers them),
// a map otherwise.
type onnxIndex struct {
	dense  []int32 // -1: no such node
	sparse map[int64]int
}

func newONNXIndex(n int) onnxIndex {
	d := make([]int32, n)
	for i := range d {
		d[i] = -1
	}
	return onnxIndex{dense: d}
}

func (x *onnxIndex) get(id int64) (int, bool) {
	if x.sparse != nil {
		i, ok := x.sparse[id]
		return i, ok
	}
	if id < 0 || id >= int64(len(x.dense)) || x.dense[id] < 0 {
		return 0, false
	}
	return int(x.dense[id]), true
}

func (x *onnxIndex) set(id int64, i int) {
	if x.sparse == nil && id >= 0 && id < int64(len(x.dense)) {
		x.dense[id] = int32(i)
		return
	}
	if x.sparse == nil {
		x.sparse = make(map[int64]int, len(x.dense))
		for j, v := range x.dense {
			if v >= 0 {
				x.sparse[int64(j)] = int(v)
			}
		}
		x.dense = nil
	}
	x.sparse[id] = i
}

// onnxModes are the node modes of opsets 1 to 3.
var onnxModes = map[string]bool{"BRANCH_LEQ": true, "BRANCH_LT": true, "BRANCH_GTE": true, "BRANCH_GT": true, "BRANCH_EQ": true, "BRANCH_NEQ": true, "LEAF": true}

// onnxLen is the length of one per-node attribute.
type onnxLen struct {
	key string
	n   int
}

// perNode checks that every per-node attribute (and the optional
// nodes_missing_value_tracks_true) has n entries, as ref has.
func (e *onnxEnsemble) perNode(name, ref string, n int, missingTrue []int64, lens []onnxLen) error {
	if missingTrue != nil {
		lens = append(lens, onnxLen{"nodes_missing_value_tracks_true", len(missingTrue)})
	}
	for _, a := range lens {
		if a.n != n {
			return onnxErr(name, "%s: %s has %d entries, %s has %d: one per node", e.op, a.key, a.n, ref, n)
		}
	}
	return nil
}

// onnxSplit checks split node i of tree tree (node id node): its feature id,
// its threshold (unless it is a set), and its missing-value tracking.
func onnxSplit(name string, tree, node, feature int64, value float32, isSet bool, missingTrue []int64, i int) (int, bool, error) {
	if feature < 0 || feature >= 1<<24 {
		return 0, false, onnxErr(name, "tree %d, node %d: feature id %d is out of range", tree, node, feature)
	}
	if v := float64(value); !isSet && (math.IsNaN(v) || math.IsInf(v, 0)) {
		return 0, false, onnxErr(name, "tree %d, node %d: threshold is %v", tree, node, v)
	}
	if missingTrue == nil {
		return int(feature), false, nil
	}
	switch missingTrue[i] {
	case 0:
		return int(feature), false, nil
	case 1:
		return int(feature), true, nil
	}
	return 0, false, onnxErr(name, "tree %d, node %d: nodes_missing_value_tracks_true is %d, not 0 or 1", tree, node, missingTrue[i])
}

// trees groups the per-node attributes into trees in the order ONNX Runtime
// adds them, and attaches the weights to their leaves.
func (e *onnxEnsemble) trees(name string, k int) ([]onnxTree, int, error) {
	n := len(e.nodeIDs)
	if n == 0 {
		return nil, 0, onnxErr(name, "%s: the ensemble has no nodes", e.op)
	}
	if err := e.perNode(name, "nodes_nodeids", n, e.missingTrue, []onnxLen{{"nodes_treeids", len(e.treeIDs)}, {"nodes_featureids", len(e.featureIDs)},
		{"nodes_modes", len(e.modes)}, {"nodes_values", len(e.values)}, {"nodes_truenodeids", len(e.trueIDs)}, {"nodes_falsenodeids", len(e.falseIDs)}}); err != nil {
		return nil, 0, err
	}
	w := "target"
	if e.classifier {
		w = "class"
	}
	nw := len(e.weights)
	if len(e.wTree) != nw || len(e.wNode) != nw || len(e.wTarget) != nw {
		return nil, 0, onnxErr(name, "%s: %s_treeids, %s_nodeids, %s_ids and %s_weights have %d, %d, %d and %d entries: one per weight", e.op, w, w, w, w, len(e.wTree), len(e.wNode), len(e.wTarget), nw)
	}
	treeOf := map[int64]int{} // tree id -> index in trees
	var trees []onnxTree
	maxFeature := -1
	for i := 0; i < n; i++ {
		tid, nid := e.treeIDs[i], e.nodeIDs[i]
		ti, ok := treeOf[tid]
		if !ok {
			ti = len(trees)
			treeOf[tid] = ti
			end := i + 1
			for end < n && e.treeIDs[end] == tid {
				end++
			}
			trees = append(trees, onnxTree{id: tid, index: newONNXIndex(end - i), nodes: make([]onnxNode, 0, end-i)})
		} else if ti != len(trees)-1 {
			return nil, 0, onnxErr(name, "tree %d, node %d: the tree's nodes are not listed together (ONNX Runtime starts a tree where the tree id changes)", tid, nid)
		}
		t := &trees[ti]
		if _, dup := t.index.get(nid); dup {
			return nil, 0, onnxErr(name, "tree %d, node %d: node id given twice", tid, nid)
		}
		t.index.set(nid, len(t.nodes))
		mode := e.modes[i]
		if !onnxModes[mode] {
			if mode == "BRANCH_MEMBER" {
				return nil, 0, onnxErr(name, "tree %d, node %d: mode BRANCH_MEMBER belongs to TreeEnsemble (opset 5), not to %s", tid, nid, e.op)
			}
			return nil, 0, onnxErr(name, "tree %d, node %d: unknown node mode %q", tid, nid, clip([]byte(mode)))
		}
		nd := onnxNode{id: nid, mode: mode, feature: -1, value: e.values[i], trueChild: -1, falseChild: -1}
		if mode != "LEAF" {
			var err error
			nd.feature, nd.missingTrue, err = onnxSplit(name, tid, nid, e.featureIDs[i], nd.value, false, e.missingTrue, i)
			if err != nil {
				return nil, 0, err
			}
			maxFeature = max(maxFeature, nd.feature)
		}
		t.nodes = append(t.nodes, nd)
	}
	// Children, now that every node has its index.
	pos := 0
	for ti := range trees {
		t := &trees[ti]
		for j := range t.nodes {
			nd := &t.nodes[j]
			i := pos + j
			if nd.mode == "LEAF" {
				continue
			}
			for _, c := range []struct {
				id  int64
				dst *int
				key string
			}{{e.trueIDs[i], &nd.trueChild, "nodes_truenodeids"}, {e.falseIDs[i], &nd.falseChild, "nodes_falsenodeids"}} {
				ci, ok := t.index.get(c.id)
				if !ok {
					return nil, 0, onnxErr(name, "tree %d, node %d: %s names node %d, which the tree does not have", t.id, nd.id, c.key, c.id)
				}
				*c.dst = ci
			}
		}
		pos += len(t.nodes)
	}
	// Weights.
	for i := 0; i < nw; i++ {
		tid, nid := e.wTree[i], e.wNode[i]
		ti, ok := treeOf[tid]
		if !ok {
			return nil, 0, onnxErr(name, "%s weight %d: tree %d does not exist", w, i, tid)
		}
		j, ok := trees[ti].index.get(nid)
		if !ok {
			return nil, 0, onnxErr(name, "tree %d, node %d: a %s weight names a node the tree does not have", tid, nid, w)
		}
		nd := &trees[ti].nodes[j]
		if nd.mode != "LEAF" {
			return nil, 0, onnxErr(name, "tree %d, node %d: a %s weight on a node that is not a LEAF", tid, nid, w)
		}
		c := e.wTarget[i]
		if c < 0 || c >= int64(k) {
			return nil, 0, onnxErr(name, "tree %d, node %d: %s id %d is out of range [0, %d)", tid, nid, w, c, k)
		}
		v := e.weights[i]
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return nil, 0, onnxErr(name, "tree %d, node %d: weight is %v", tid, nid, v)
		}
		for _, o := range nd.leaf {
			if o.target == int(c) {
				// ONNX Runtime adds each weight to the running sum in turn;
				// one leaf value cannot say two float32 additions.
				return nil, 0, onnxErr(name, "tree %d, node %d: two weights for %s %d on one leaf", tid, nid, w, c)
			}
		}
		nd.leaf = append(nd.leaf, onnxWeight{target: int(c), w: v})
	}
	return trees, maxFeature + 1, nil
}

// forest converts the checked ensemble into a format-2 forest.
func (e *onnxEnsemble) forest(name string, nf int, fileSize int64, o Options) (*Result, error) {
	var notes []string
	f := &forest.Forest{
		InputPrecision: forest.Float32,
		Accumulate:     forest.Float32,
		Transform:      forest.NoTransform,
	}
	switch e.aggregate {
	case "SUM":
		f.Combine = forest.Sum
	case "AVERAGE":
		f.Combine = forest.Average
	default:
		return nil, onnxErr(name, "%s: aggregate_function %q is not read; sawmill reads SUM and AVERAGE", e.op, clip([]byte(e.aggregate)))
	}
	// k is the number of weight targets; outs the number of outputs.
	var k int
	binaryCase := false
	if e.classifier {
		f.Task = forest.Classification
		f.Classes = e.labels
		k = len(e.labels)
		if k == 2 && len(e.wTarget) > 0 {
			binaryCase = true
			for _, c := range e.wTarget {
				binaryCase = binaryCase && c == 0
			}
		}
	} else {
		f.Task = forest.Regression
		if e.nTargets < 1 || e.nTargets > 1<<16 {
			return nil, onnxErr(name, "%s: n_targets is %d", e.op, e.nTargets)
		}
		k = int(e.nTargets)
		if k > 1 {
			f.Outputs = k
		}
	}
	var trees []onnxTree
	var width int
	var err error
	if e.v5 != nil {
		trees, width, err = e.treesV5(name, k)
	} else {
		e.size = len(e.nodeIDs)
		trees, width, err = e.trees(name, k)
	}
	if err != nil {
		return nil, err
	}
	switch {
	case nf == 0:
		nf = max(width, 1)
		notes = append(notes, fmt.Sprintf("the input's shape does not say how many features: %d, from the highest feature id used", nf))
	case width > nf:
		return nil, onnxErr(name, "%s: a node splits on feature %d, but the input has %d features", e.op, width-1, nf)
	}
	if e.base != nil && len(e.base) != k && !(binaryCase && len(e.base) == 1) {
		return nil, onnxErr(name, "%s: base_values has %d entries for %d outputs", e.op, len(e.base), k)
	}
	for i, b := range e.base {
		if math.IsNaN(float64(b)) || math.IsInf(float64(b), 0) {
			return nil, onnxErr(name, "%s: base_values[%d] is %v", e.op, i, b)
		}
	}

	// outs is the number of outputs: k, but 1 in the binary case under
	// LOGISTIC.
	outs := k
	switch e.post {
	case "NONE", "LOGISTIC", "SOFTMAX", "SOFTMAX_ZERO", "PROBIT":
	default:
		return nil, onnxErr(name, "%s: unknown post_transform %q", e.op, clip([]byte(e.post)))
	}
	// positive: no weight is negative, which decides what ONNX Runtime
	// makes of a binary case's one score.
	positive := !slices.ContainsFunc(e.weights, func(w float32) bool { return w < 0 })
	switch {
	case e.post == "PROBIT":
		return nil, onnxErr(name, "%s: post_transform PROBIT (the inverse of the normal distribution function) has no counterpart in sawmill's model format", e.op)
	case binaryCase && e.post == "LOGISTIC":
		f.Transform = forest.Logistic
		outs = 1
		notes = append(notes, "one score s for two labels: the output is p = logistic(s), the probability of the second label; ONNX Runtime also outputs 1-p for the first")
		if positive {
			notes = append(notes, "warning: no weight is negative, so ONNX Runtime's label is the second when s > 0.5, not when p > 0.5 as its own probabilities say; sawmill's class follows the probabilities")
		}
	case binaryCase:
		// NONE, and SOFTMAX and SOFTMAX_ZERO, which ONNX Runtime does not
		// apply in the binary case.
		s := "[-s, s]"
		if positive {
			s = "[1-s, s]"
		}
		notes = append(notes, fmt.Sprintf("one score s for two labels: the outputs are %s, as ONNX Runtime gives them under post_transform %s", s, e.post))
	case e.post == "NONE":
	case k == 1 && !e.classifier:
		// One target: ONNX Runtime applies PROBIT only (measured: LOGISTIC
		// leaves the score as it is).
		notes = append(notes, fmt.Sprintf("post_transform %s on a single target: ONNX Runtime does not apply it, and neither does sawmill", e.post))
	case e.post == "LOGISTIC":
		f.Transform = forest.LogisticEach
	case e.post == "SOFTMAX":
		f.Transform = forest.Softmax
	case e.post == "SOFTMAX_ZERO":
		return nil, onnxErr(name, "%s: post_transform SOFTMAX_ZERO (a softmax that leaves zero scores at zero) has no counterpart in sawmill's model format\nhint: convert the model with post_transform SOFTMAX or NONE", e.op)
	}

	// A leaf's vector: the weights of each output, zero where none (adding
	// +0 changes no float32 sum that starts at +0). In the binary case the
	// two outputs are -s and s, each a float32 sum of negated or plain
	// weights (rounding to nearest is symmetric, so the first stays the exact
	// negation of the second); with a logistic there is one, s.
	vec := func(ws []onnxWeight, dst []float64) {
		for _, wt := range ws {
			if binaryCase {
				if outs == 2 {
					dst[0] = -float64(wt.w)
					dst[1] = float64(wt.w)
				} else {
					dst[0] = float64(wt.w)
				}
				continue
			}
			dst[wt.target] = float64(wt.w)
		}
	}
	// Memory in proportion to the file: node slots (an equality test on a
	// non-integer copies a subtree) and value slots (a node of a model of
	// many targets holds a vector).
	budget := 4*int64(e.size) + 1024
	maxNodes := o.Read.MaxNodes
	if maxNodes <= 0 {
		maxNodes = forest.DefaultMaxNodes
	}
	budget = min(budget, maxNodes)
	var c onnxConv
	c.budget = budget
	c.values = 32*fileSize + 1<<16
	for ti := range trees {
		t := &trees[ti]
		// A SUM tree whose weights all go to one target adds to that output
		// only (AVERAGE divides by every tree, so its trees keep whole
		// vectors).
		single := -1
		if f.Combine == forest.Sum && !binaryCase && outs > 1 {
			single = onnxSingleTarget(t)
		}
		w := outs
		if single >= 0 {
			w = 1
		}
		ft, err := c.tree(t, name, w, func(ws []onnxWeight, dst []float64) {
			if single >= 0 {
				for _, wt := range ws {
					dst[0] = float64(wt.w)
				}
				return
			}
			vec(ws, dst)
		})
		if err != nil {
			return nil, err
		}
		if single >= 0 {
			ft.HasOutput, ft.Output = true, single
		}
		f.Trees = append(f.Trees, ft)
	}
	// Base values.
	base := make([]float64, outs)
	for j, b := range e.base {
		switch {
		case binaryCase && j > 0:
			if b != 0 {
				return nil, onnxErr(name, "%s: base_values[1] is %v in a classifier that scores only class 0; ONNX Runtime's use of it was not measured", e.op, b)
			}
		case binaryCase && outs == 2:
			base[0], base[1] = -float64(b), float64(b)
		default:
			base[j] = float64(b)
		}
	}
	if f.Combine == forest.Average {
		f.BaseScore = base
	} else {
		f.BaseScore = make([]float64, outs)
		added := false
		for j, b := range base {
			if b == 0 {
				continue // +0 changes no float32 sum that starts at +0
			}
			t := forest.Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1}, MissingLeft: []bool{false}}
			switch {
			case binaryCase && outs == 2:
				if j == 1 {
					continue
				}
				t.Value = slices.Clone(base)
			case outs == 1:
				t.Value = []float64{b}
			default:
				t.HasOutput, t.Output, t.Value = true, j, []float64{b}
			}
			f.Trees = append(f.Trees, t)
			added = true
		}
		if added {
			notes = append(notes, "base_values added after the trees, as ONNX Runtime does: they are the last tree(s), of a single leaf")
		}
		if binaryCase && outs == 2 && positive {
			// 1-s: the first output holds -s; one more float32 addition.
			f.Trees = append(f.Trees, forest.Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1}, MissingLeft: []bool{false},
				HasOutput: true, Output: 0, Value: []float64{1}})
		}
	}
	if c.sets > 0 {
		f.CategoryMatch = forest.MatchExact
		notes = append(notes, fmt.Sprintf("%d equality tests on whole numbers written as set splits (category_match exact)", c.sets))
	}
	if c.strict > 0 {
		notes = append(notes, fmt.Sprintf("%d strict comparisons x < t rewritten as x <= the largest float32 below t", c.strict))
	}
	if c.eq2 > 0 {
		notes = append(notes, fmt.Sprintf("%d equality tests on other numbers written as two splits each (the subtree of the unequal side is copied)", c.eq2))
	}
	for i := 0; i < nf; i++ {
		f.Features = append(f.Features, "f"+strconv.Itoa(i))
	}
	notes = append(notes, "ONNX names no features: called f0, f1, ... in input order (--features names them)")
	notes = append(notes, "ONNX Runtime adds the trees in float32: the model this file was converted from may score a little differently (float64 sums, thresholds the converter rounded to float32); sawmill reproduces the ONNX model")
	if note, err := o.missing32(f, name); err != nil {
		return nil, err
	} else if note != "" {
		notes = append(notes, note)
	}
	if o.Iterations > 0 {
		return nil, onnxErr(name, "--iterations: an ONNX ensemble has no boosting rounds to keep")
	}
	rn, err := o.rename(f, name)
	if err != nil {
		return nil, err
	}
	return &Result{Forest: f, Notes: append(notes, rn...)}, nil
}

// onnxSingleTarget returns the one target every weight of t goes to, or -1
// when there are several (or none).
func onnxSingleTarget(t *onnxTree) int {
	target := -1
	for i := range t.nodes {
		for _, wt := range t.nodes[i].leaf {
			if target >= 0 && wt.target != target {
				return -1
			}
			target = wt.target
		}
	}
	return target
}

// onnxConv turns ONNX trees into sawmill trees and counts the rewrites.
type onnxConv struct {
	budget            int64 // node slots left over all trees
	values            int64 // value slots left over all trees
	strict, sets, eq2 int
	visited           []int8
}

// onnxTask is one node to write: ONNX node src becomes sawmill node dst.
type onnxTask struct{ src, dst int }

// tree writes t as a sawmill tree of value width w, without recursion. Every
// ONNX node must be reached once from the root (no cycle, no shared child);
// the equality tests written as two splits copy one child's subtree.
func (c *onnxConv) tree(t *onnxTree, name string, w int, leaf func([]onnxWeight, []float64)) (forest.Tree, error) {
	// Check that the nodes form a tree before writing anything.
	c.visited = slices.Grow(c.visited[:0], len(t.nodes))[:len(t.nodes)]
	clear(c.visited)
	stack := []int{0}
	c.visited[0] = 1
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		nd := &t.nodes[i]
		if nd.trueChild < 0 {
			continue
		}
		for _, ch := range []int{nd.trueChild, nd.falseChild} {
			if c.visited[ch] != 0 {
				return forest.Tree{}, onnxErr(name, "tree %d, node %d: child %d is reached twice (a cycle, or a node shared by two parents)", t.id, nd.id, t.nodes[ch].id)
			}
			c.visited[ch] = 1
			stack = append(stack, ch)
		}
	}
	m := len(t.nodes)
	ft := forest.Tree{Feature: make([]int, 0, m), Threshold: make([]float64, 0, m), Left: make([]int, 0, m),
		Right: make([]int, 0, m), MissingLeft: make([]bool, 0, m), Value: make([]float64, 0, m*w)}
	cats := make([][]int32, 0, m)
	newNode := func() (int, error) {
		if c.budget <= 0 {
			return 0, onnxErr(name, "tree %d: the model needs more nodes than the limit allows (equality tests on non-integers copy subtrees)", t.id)
		}
		c.budget--
		c.values -= int64(w)
		if c.values < 0 {
			return 0, onnxErr(name, "tree %d: %d outputs per node take more memory than a file of this size may ask for", t.id, w)
		}
		ft.Feature = append(ft.Feature, -1)
		ft.Threshold = append(ft.Threshold, 0)
		ft.Left = append(ft.Left, -1)
		ft.Right = append(ft.Right, -1)
		ft.MissingLeft = append(ft.MissingLeft, false)
		ft.Value = append(ft.Value, make([]float64, w)...)
		cats = append(cats, nil)
		return len(ft.Left) - 1, nil
	}
	split := func(dst, feature int, th float64, left, right int, missLeft bool) {
		ft.Feature[dst], ft.Threshold[dst] = feature, th
		ft.Left[dst], ft.Right[dst], ft.MissingLeft[dst] = left, right, missLeft
	}
	root, err := newNode()
	if err != nil {
		return ft, err
	}
	work := []onnxTask{{0, root}}
	for len(work) > 0 {
		tk := work[len(work)-1]
		work = work[:len(work)-1]
		nd := &t.nodes[tk.src]
		if nd.trueChild < 0 {
			leaf(nd.leaf, ft.Value[tk.dst*w:(tk.dst+1)*w])
			continue
		}
		tn, err := newNode()
		if err != nil {
			return ft, err
		}
		fn, err := newNode()
		if err != nil {
			return ft, err
		}
		work = append(work, onnxTask{nd.trueChild, tn}, onnxTask{nd.falseChild, fn})
		v := nd.value
		at := func() error {
			return onnxErr(name, "tree %d, node %d: %s %v: no float32 lies below it, so x < t cannot be written as x <= t'", t.id, nd.id, nd.mode, v)
		}
		switch nd.mode {
		case "BRANCH_LEQ":
			split(tk.dst, nd.feature, float64(v), tn, fn, nd.missingTrue)
		case "BRANCH_GT":
			split(tk.dst, nd.feature, float64(v), fn, tn, !nd.missingTrue)
		case "BRANCH_LT", "BRANCH_GTE":
			p := prev32(v)
			if math.IsInf(float64(p), 0) {
				return ft, at()
			}
			c.strict++
			if nd.mode == "BRANCH_LT" {
				split(tk.dst, nd.feature, float64(p), tn, fn, nd.missingTrue)
			} else {
				split(tk.dst, nd.feature, float64(p), fn, tn, !nd.missingTrue)
			}
		case "BRANCH_MEMBER":
			split(tk.dst, nd.feature, 0, tn, fn, nd.missingTrue)
			cats[tk.dst] = nd.set
			c.sets++
		case "BRANCH_EQ", "BRANCH_NEQ":
			// eq is the child taken when x == v, ne the other; NaN goes to
			// the true child when tracked, and NaN != v is true.
			eq, ne := tn, fn
			neSrc := nd.falseChild
			nanEq := nd.missingTrue
			if nd.mode == "BRANCH_NEQ" {
				eq, ne = fn, tn
				neSrc = nd.trueChild
				nanEq = false
			}
			if fv := float64(v); fv == math.Trunc(fv) && fv >= 0 && fv < forest.MaxCategory {
				split(tk.dst, nd.feature, 0, eq, ne, nanEq)
				cats[tk.dst] = []int32{int32(fv)}
				c.sets++
				continue
			}
			// x == v: x <= v and not x <= prev32(v). The first split's
			// "greater" side and the second's "below" side both lead to ne,
			// which is copied.
			p := prev32(v)
			if math.IsInf(float64(p), 0) {
				return ft, at()
			}
			inner, err := newNode()
			if err != nil {
				return ft, err
			}
			ne2, err := newNode()
			if err != nil {
				return ft, err
			}
			split(tk.dst, nd.feature, float64(v), inner, ne, nanEq)
			split(inner, nd.feature, float64(p), ne2, eq, !nanEq)
			// The tasks for eq and ne are on the stack already; ne's subtree
			// is written a second time at ne2.
			work = append(work, onnxTask{neSrc, ne2})
			c.eq2++
		default:
			panic("BUG: onnx: unchecked node mode " + nd.mode)
		}
	}
	if slices.ContainsFunc(cats, func(s []int32) bool { return s != nil }) {
		ft.Categories = cats
	}
	return ft, nil
}
