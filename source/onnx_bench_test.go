package source

import (
	"math/rand/v2"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/sawmill-dev/sawmill/source/internal/onnxpb"
)

// bigONNXModel writes an ONNX file of one TreeEnsembleRegressor (ai.onnx.ml
// opset 3) of trees full trees of the given depth on features features,
// with pseudo-random modes, thresholds and leaves, shaped as skl2onnx writes
// a gradient-boosted regressor.
func bigONNXModel(trees, depth, features int) []byte {
	rng := rand.New(rand.NewPCG(3, 4))
	n := 1<<(depth+1) - 1
	var treeIDs, nodeIDs, feats, trueIDs, falseIDs, wTree, wNode, wID []int64
	var modes [][]byte
	var values, weights []float32
	modeNames := [][]byte{[]byte("BRANCH_LEQ"), []byte("BRANCH_LT"), []byte("BRANCH_GT"), []byte("BRANCH_GTE")}
	for t := 0; t < trees; t++ {
		for i := 0; i < n; i++ {
			treeIDs = append(treeIDs, int64(t))
			nodeIDs = append(nodeIDs, int64(i))
			if 2*i+1 < n {
				modes = append(modes, modeNames[rng.IntN(len(modeNames))])
				feats = append(feats, int64(rng.IntN(features)))
				values = append(values, float32(rng.NormFloat64()))
				trueIDs = append(trueIDs, int64(2*i+1))
				falseIDs = append(falseIDs, int64(2*i+2))
				continue
			}
			modes = append(modes, []byte("LEAF"))
			feats = append(feats, 0)
			values = append(values, 0)
			trueIDs = append(trueIDs, 0)
			falseIDs = append(falseIDs, 0)
			wTree = append(wTree, int64(t))
			wNode = append(wNode, int64(i))
			wID = append(wID, 0)
			weights = append(weights, float32(rng.NormFloat64()/16))
		}
	}
	ints := func(name string, v []int64) *onnxpb.AttributeProto {
		return &onnxpb.AttributeProto{Name: proto.String(name), Type: onnxpb.AttributeProto_INTS.Enum(), Ints: v}
	}
	floats := func(name string, v []float32) *onnxpb.AttributeProto {
		return &onnxpb.AttributeProto{Name: proto.String(name), Type: onnxpb.AttributeProto_FLOATS.Enum(), Floats: v}
	}
	str := func(name, v string) *onnxpb.AttributeProto {
		return &onnxpb.AttributeProto{Name: proto.String(name), Type: onnxpb.AttributeProto_STRING.Enum(), S: []byte(v)}
	}
	node := &onnxpb.NodeProto{
		Input: []string{"X"}, Output: []string{"Y"}, Name: proto.String("ensemble"),
		OpType: proto.String("TreeEnsembleRegressor"), Domain: proto.String("ai.onnx.ml"),
		Attribute: []*onnxpb.AttributeProto{
			ints("nodes_treeids", treeIDs), ints("nodes_nodeids", nodeIDs), ints("nodes_featureids", feats),
			{Name: proto.String("nodes_modes"), Type: onnxpb.AttributeProto_STRINGS.Enum(), Strings: modes},
			floats("nodes_values", values), ints("nodes_truenodeids", trueIDs), ints("nodes_falsenodeids", falseIDs),
			ints("target_treeids", wTree), ints("target_nodeids", wNode), ints("target_ids", wID), floats("target_weights", weights),
			{Name: proto.String("n_targets"), Type: onnxpb.AttributeProto_INT.Enum(), I: proto.Int64(1)},
			str("aggregate_function", "SUM"), str("post_transform", "NONE"), floats("base_values", []float32{0.5}),
		},
	}
	tensor := func(name string, dims ...int64) *onnxpb.ValueInfoProto {
		shape := &onnxpb.TensorShapeProto{}
		for _, d := range dims {
			shape.Dim = append(shape.Dim, &onnxpb.TensorShapeProto_Dimension{Value: &onnxpb.TensorShapeProto_Dimension_DimValue{DimValue: d}})
		}
		return &onnxpb.ValueInfoProto{Name: proto.String(name), Type: &onnxpb.TypeProto{Value: &onnxpb.TypeProto_TensorType{
			TensorType: &onnxpb.TypeProto_Tensor{ElemType: proto.Int32(int32(onnxpb.TensorProto_FLOAT)), Shape: shape}}}}
	}
	m := &onnxpb.ModelProto{
		IrVersion:   proto.Int64(9),
		OpsetImport: []*onnxpb.OperatorSetIdProto{{Domain: proto.String(""), Version: proto.Int64(17)}, {Domain: proto.String("ai.onnx.ml"), Version: proto.Int64(3)}},
		Graph: &onnxpb.GraphProto{Name: proto.String("big"), Node: []*onnxpb.NodeProto{node},
			Input: []*onnxpb.ValueInfoProto{tensor("X", 1, int64(features))}, Output: []*onnxpb.ValueInfoProto{tensor("Y", 1, 1)}},
	}
	data, err := proto.Marshal(m)
	if err != nil {
		panic(err)
	}
	return data
}

// BenchmarkONNXImport reads a 1,000-tree depth-8 model (511,000 nodes)
// from its .onnx file: the budget is 5 s and 1 GB (B/op counts every
// allocation, so it bounds the peak from above).
//
//	go test ./source -run '^$' -bench ONNXImport -benchmem
func BenchmarkONNXImport(b *testing.B) {
	data := bigONNXModel(1000, 8, 30)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		r, err := Decode(data, "big.onnx", "", Options{})
		if err != nil {
			b.Fatal(err)
		}
		if len(r.Forest.Trees) != 1001 { // and one tree for the base value
			b.Fatal("wrong tree count", len(r.Forest.Trees))
		}
	}
}
