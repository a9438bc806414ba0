package source

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"strconv"
	"testing"
)

// bigXGBModel writes an XGBoost JSON document of trees full trees of the
// given depth (2^(depth+1)-1 nodes each) on features features, shaped as
// XGBoost 3.x saves a binary:logistic gbtree, with pseudo-random splits and
// leaves.
func bigXGBModel(trees, depth, features int, ubj bool) []byte {
	rng := rand.New(rand.NewPCG(1, 2))
	n := 1<<(depth+1) - 1
	var b bytes.Buffer
	b.WriteString(`{"learner":{"attributes":{},"feature_names":[],"feature_types":[],"gradient_booster":{"model":{"gbtree_model_param":{"num_parallel_tree":"1","num_trees":"`)
	b.WriteString(strconv.Itoa(trees))
	b.WriteString(`"},"trees":[`)
	list := func(key string, f func(i int) string) {
		fmt.Fprintf(&b, "%q:[", key)
		for i := 0; i < n; i++ {
			if i > 0 {
				b.WriteByte(',')
			}
			b.WriteString(f(i))
		}
		b.WriteString("],")
	}
	for t := 0; t < trees; t++ {
		if t > 0 {
			b.WriteByte(',')
		}
		b.WriteByte('{')
		inner := func(i int) bool { return 2*i+1 < n }
		list("base_weights", func(int) string { return "0E0" })
		list("default_left", func(int) string { return strconv.Itoa(rng.IntN(2)) })
		list("left_children", func(i int) string {
			if inner(i) {
				return strconv.Itoa(2*i + 1)
			}
			return "-1"
		})
		list("right_children", func(i int) string {
			if inner(i) {
				return strconv.Itoa(2*i + 2)
			}
			return "-1"
		})
		list("split_indices", func(i int) string { return strconv.Itoa(rng.IntN(features)) })
		list("split_conditions", func(i int) string {
			return strconv.FormatFloat(float64(float32(rng.NormFloat64())), 'g', -1, 32)
		})
		list("split_type", func(int) string { return "0" })
		fmt.Fprintf(&b, `"categories":[],"categories_nodes":[],"categories_segments":[],"categories_sizes":[],"id":%d,"tree_param":{"num_deleted":"0","num_feature":"%d","num_nodes":"%d","size_leaf_vector":"1"}}`, t, features, n)
	}
	b.WriteString(`],"tree_info":[`)
	for t := 0; t < trees; t++ {
		if t > 0 {
			b.WriteByte(',')
		}
		b.WriteByte('0')
	}
	fmt.Fprintf(&b, `]},"name":"gbtree"},"learner_model_param":{"base_score":"[5E-1]","boost_from_average":"1","num_class":"0","num_feature":"%d","num_target":"1"},"objective":{"name":"binary:logistic","reg_loss_param":{"scale_pos_weight":"1"}}},"version":[3,2,0]}`, features)
	return b.Bytes()
}

// BenchmarkXGBoostImport reads a 1,000-tree depth-8 model (511,000 nodes)
// from its JSON: the budget is 5 s and 1 GB (B/op counts every allocation,
// so it bounds the peak from above).
//
//	go test ./source -run '^$' -bench XGBoostImport -benchmem
func BenchmarkXGBoostImport(b *testing.B) {
	data := bigXGBModel(1000, 8, 30, false)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		r, err := Decode(data, "big.json", "xgboost-json", Options{})
		if err != nil {
			b.Fatal(err)
		}
		if len(r.Forest.Trees) != 1000 {
			b.Fatal("wrong tree count")
		}
	}
}
