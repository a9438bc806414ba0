package source

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	"github.com/sawmill-dev/sawmill/source/internal/onnxpb"
)

// onnxModel loads a fixture's model.onnx as a message.
func onnxModel(t *testing.T, dir string) *onnxpb.ModelProto {
	t.Helper()
	data, err := os.ReadFile(filepath.Join("testdata", "onnx", dir, "model.onnx"))
	require.NoError(t, err)
	var m onnxpb.ModelProto
	require.NoError(t, proto.Unmarshal(data, &m))
	return &m
}

// onnxAttr returns the ensemble node's attribute called name (nil if none).
func onnxAttr(m *onnxpb.ModelProto, name string) *onnxpb.AttributeProto {
	for _, a := range m.GetGraph().GetNode()[0].GetAttribute() {
		if a.GetName() == name {
			return a
		}
	}
	return nil
}

// mutateONNX loads the hand-built regressor, lets edit change it, and
// returns the file's bytes.
func mutateONNX(t *testing.T, edit func(m *onnxpb.ModelProto)) []byte {
	m := onnxModel(t, "hand-modes-sum")
	edit(m)
	data, err := proto.Marshal(m)
	require.NoError(t, err)
	return data
}

// TestONNXRefuses: damaged and hostile files get an error that names the
// file, and the tree and node where there is one; nothing panics.
func TestONNXRefuses(t *testing.T) {
	good, err := os.ReadFile(filepath.Join("testdata", "onnx", "hand-modes-sum", "model.onnx"))
	require.NoError(t, err)
	// A length bomb: ir_version, then a graph (field 7) declared 2^40 bytes
	// long in a file of a few bytes. The protobuf library checks declared
	// lengths against the bytes left before it allocates.
	bomb := protowire.AppendTag(nil, 1, protowire.VarintType)
	bomb = protowire.AppendVarint(bomb, 9)
	bomb = protowire.AppendTag(bomb, 7, protowire.BytesType)
	bomb = protowire.AppendVarint(bomb, 1<<40)
	bomb = append(bomb, []byte("ai.onnx.ml TreeEnsemble")...)
	// A packed repeated field declared far longer than the file, inside a
	// well-formed graph: the attribute's ints (field 8 of AttributeProto).
	inner := protowire.AppendTag(nil, 1, protowire.BytesType)
	inner = protowire.AppendString(inner, "nodes_treeids")
	inner = protowire.AppendTag(inner, 8, protowire.BytesType)
	inner = protowire.AppendVarint(inner, 1<<31)
	packedBomb := mutateONNX(t, func(m *onnxpb.ModelProto) {})
	packedBomb = append(packedBomb, inner...) // trailing garbage after the model's fields

	cases := []struct {
		name string
		data []byte
		want string
	}{
		{"truncated", good[:len(good)/2], "m.onnx: not a readable ONNX model"},
		{"length bomb", bomb, "m.onnx: not a readable ONNX model"},
		{"packed length bomb", packedBomb, "m.onnx: not a readable ONNX model"},
		{"cycle", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_truenodeids").Ints[1] = 0 }),
			"m.onnx: tree 0, node 1: child 0 is reached twice"},
		{"shared child", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_falsenodeids").Ints[1] = 5 }),
			"m.onnx: tree 0, node 1: child 5 is reached twice"},
		{"child out of range", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_truenodeids").Ints[0] = 999 }),
			"m.onnx: tree 0, node 0: nodes_truenodeids names node 999, which the tree does not have"},
		{"feature out of range", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_featureids").Ints[2] = 7 }),
			"m.onnx: TreeEnsembleRegressor: a node splits on feature 7, but the input has 4 features"},
		{"negative feature", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_featureids").Ints[2] = -1 }),
			"m.onnx: tree 0, node 2: feature id -1 is out of range"},
		{"short attribute", mutateONNX(t, func(m *onnxpb.ModelProto) {
			a := onnxAttr(m, "nodes_featureids")
			a.Ints = a.Ints[1:]
		}), "m.onnx: TreeEnsembleRegressor: nodes_featureids has 59 entries, nodes_nodeids has 60: one per node"},
		{"weights lengths", mutateONNX(t, func(m *onnxpb.ModelProto) {
			a := onnxAttr(m, "target_weights")
			a.Floats = a.Floats[1:]
		}), "m.onnx: TreeEnsembleRegressor: target_treeids, target_nodeids, target_ids and target_weights have 32, 32, 32 and 31 entries"},
		{"weight on a split", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "target_nodeids").Ints[0] = 0 }),
			"m.onnx: tree 0, node 0: a target weight on a node that is not a LEAF"},
		{"target out of range", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "target_ids").Ints[0] = 1 }),
			"m.onnx: tree 0, node 7: target id 1 is out of range [0, 1)"},
		{"duplicate node", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_nodeids").Ints[1] = 0 }),
			"m.onnx: tree 0, node 0: node id given twice"},
		{"scattered tree", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_treeids").Ints[20] = 0 }),
			"m.onnx: tree 0, node 5: the tree's nodes are not listed together"},
		{"unknown mode", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_modes").Strings[0] = []byte("BRANCH_SOMETIMES") }),
			"m.onnx: tree 0, node 0: unknown node mode \"BRANCH_SOMETIMES\""},
		{"nan threshold", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_values").Floats[0] = float32(nan()) }),
			"m.onnx: tree 0, node 0: threshold is NaN"},
		{"tracks true 2", mutateONNX(t, func(m *onnxpb.ModelProto) { onnxAttr(m, "nodes_missing_value_tracks_true").Ints[0] = 2 }),
			"m.onnx: tree 0, node 0: nodes_missing_value_tracks_true is 2, not 0 or 1"},
		{"double thresholds", mutateONNX(t, func(m *onnxpb.ModelProto) {
			a := onnxAttr(m, "nodes_values")
			a.Name = proto.String("nodes_values_as_tensor")
			a.Type = onnxpb.AttributeProto_TENSOR.Enum()
			a.T = &onnxpb.TensorProto{DataType: proto.Int32(int32(onnxpb.TensorProto_DOUBLE)), DoubleData: make([]float64, len(a.Floats))}
			a.Floats = nil
		}), "m.onnx: TreeEnsembleRegressor \"ensemble\": attribute nodes_values_as_tensor: is a tensor of DOUBLE"},
		{"unknown attribute", mutateONNX(t, func(m *onnxpb.ModelProto) {
			n := m.GetGraph().GetNode()[0]
			n.Attribute = append(n.Attribute, &onnxpb.AttributeProto{Name: proto.String("nodes_shuffle"), Type: onnxpb.AttributeProto_INT.Enum(), I: proto.Int64(1)})
		}), "m.onnx: TreeEnsembleRegressor \"ensemble\": attribute nodes_shuffle is not read"},
		{"opset 5", mutateONNX(t, func(m *onnxpb.ModelProto) {
			m.GetGraph().GetNode()[0].OpType = proto.String("TreeEnsemble")
			for _, op := range m.GetOpsetImport() {
				if op.GetDomain() == "ai.onnx.ml" {
					op.Version = proto.Int64(5)
				}
			}
		}), "m.onnx: TreeEnsemble \"ensemble\": attribute base_values is not read"},
		{"opset 3 operator under opset 5", mutateONNX(t, func(m *onnxpb.ModelProto) {
			for _, op := range m.GetOpsetImport() {
				if op.GetDomain() == "ai.onnx.ml" {
					op.Version = proto.Int64(5)
				}
			}
		}), "m.onnx: graph node \"ensemble\": TreeEnsembleRegressor of ai.onnx.ml opset 5 is not read"},
		{"two inputs", mutateONNX(t, func(m *onnxpb.ModelProto) {
			g := m.GetGraph()
			g.Input = append(g.Input, g.Input[0])
		}), "m.onnx: the graph has 2 inputs"},
		{"double input", mutateONNX(t, func(m *onnxpb.ModelProto) {
			m.GetGraph().GetInput()[0].GetType().GetTensorType().ElemType = proto.Int32(int32(onnxpb.TensorProto_DOUBLE))
		}), "m.onnx: input \"X\" is a tensor of DOUBLE; sawmill reads a float input tensor"},
		{"no graph", mutateONNX(t, func(m *onnxpb.ModelProto) { m.Graph = &onnxpb.GraphProto{} }),
			"m.onnx: the graph has 0 inputs"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var err error
			got := allocatedBytes(func() { _, err = Decode(c.data, "m.onnx", "onnx", Options{}) })
			require.Error(t, err)
			require.Contains(t, err.Error(), c.want)
			require.Less(t, got, 512*uint64(len(c.data))+1<<21, "bytes allocated")
		})
	}
}

func nan() float64 { var z float64; return z / z }

// TestONNXGiantRepeatedField: a file that really holds a million entries
// in one attribute (and one in the rest) is read in memory in proportion to
// its size and refused for its inconsistent lengths.
func TestONNXGiantRepeatedField(t *testing.T) {
	data := mutateONNX(t, func(m *onnxpb.ModelProto) {
		a := onnxAttr(m, "nodes_treeids")
		a.Ints = make([]int64, 1_000_000)
	})
	var err error
	got := allocatedBytes(func() { _, err = Decode(data, "m.onnx", "", Options{}) })
	require.ErrorContains(t, err, "m.onnx: TreeEnsembleRegressor: nodes_treeids has 1000000 entries, nodes_nodeids has 60: one per node")
	require.Less(t, got, 64*uint64(len(data)), "bytes allocated for a file of %d bytes", len(data))
}

// TestONNXDetect: the ONNX reader claims ONNX files only, and no other
// reader claims them.
func TestONNXDetect(t *testing.T) {
	for _, fx := range onnxFixtures(t, filepath.Join("testdata", "onnx")) {
		for _, f := range Formats() {
			require.Equal(t, f.Name == "onnx", f.Detect(fx.model), "%s claimed by %s", fx.name, f.Name)
		}
	}
	others, err := filepath.Glob(filepath.Join("testdata", "*", "*", "model.*"))
	require.NoError(t, err)
	n := 0
	for _, p := range others {
		if filepath.Ext(p) == ".onnx" {
			continue
		}
		data, err := os.ReadFile(p)
		require.NoError(t, err)
		require.False(t, detectONNX(data), "%s detected as ONNX", p)
		n++
	}
	require.NotZero(t, n)
	require.False(t, detectONNX([]byte{0x08}))
	require.False(t, detectONNX(bytes.Repeat([]byte{0x08, 0x01}, 10)), "no graph")
}

// TestONNXDeepNesting: a graph inside an attribute inside a node inside a
// graph, 30,000 deep, in a file of a few hundred kilobytes: the decoder
// stops at the reader's recursion limit (32) with an error, without
// recursing further.
func TestONNXDeepNesting(t *testing.T) {
	// Written from the inside out: each level is a tag and the length of
	// everything inside it.
	fields := []protowire.Number{1, 5, 6} // GraphProto.node, NodeProto.attribute, AttributeProto.g
	var headers [][]byte
	inside := 0
	const levels = 30000
	for i := 0; i < levels; i++ {
		// The outermost (the last written) is GraphProto.node.
		h := protowire.AppendTag(nil, fields[(levels-1-i)%3], protowire.BytesType)
		h = protowire.AppendVarint(h, uint64(inside))
		headers = append(headers, h)
		inside += len(h)
	}
	data := protowire.AppendTag(nil, 1, protowire.VarintType)
	data = protowire.AppendVarint(data, 9)
	data = protowire.AppendTag(data, 7, protowire.BytesType) // ModelProto.graph
	data = protowire.AppendVarint(data, uint64(inside))
	for i := len(headers) - 1; i >= 0; i-- {
		data = append(data, headers[i]...)
	}
	_, err := Decode(data, "deep.onnx", "onnx", Options{})
	require.ErrorContains(t, err, "deep.onnx: not a readable ONNX model")
	require.ErrorContains(t, err, "recursion")
}
