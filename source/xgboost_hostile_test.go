package source

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

func xgbFile(t testing.TB, dir, file string) []byte {
	data, err := os.ReadFile(filepath.Join("testdata", "xgboost", dir, file))
	require.NoError(t, err)
	return data
}

// mutateXGB loads a (NaN-free) XGBoost JSON model, lets edit change tree 0,
// and returns the document again.
func mutateXGB(t *testing.T, edit func(tree map[string]any, doc map[string]any)) []byte {
	var doc map[string]any
	require.NoError(t, json.Unmarshal(xgbFile(t, "x3_binary_logistic", "model.json"), &doc))
	gb := doc["learner"].(map[string]any)["gradient_booster"].(map[string]any)
	tree := gb["model"].(map[string]any)["trees"].([]any)[0].(map[string]any)
	edit(tree, doc)
	out, err := json.Marshal(doc)
	require.NoError(t, err)
	return out
}

// TestXGBoostRefuses: damaged and hostile files get an error that names the
// file, and the tree and node where there is one; nothing panics.
func TestXGBoostRefuses(t *testing.T) {
	setCond := func(node int, v string) func(map[string]any, map[string]any) {
		return func(tree map[string]any, _ map[string]any) {
			tree["split_conditions"].([]any)[node] = json.RawMessage(v)
		}
	}
	cases := []struct {
		name string
		data []byte
		want string
	}{
		{"nan threshold", bytes.Replace(mutateXGB(t, setCond(0, "12345.5")), []byte("12345.5"), []byte("NaN"), 1),
			"m.json: tree 0, node 0: numeric split_condition is NaN"},
		{"inf threshold", bytes.Replace(mutateXGB(t, setCond(1, "12345.5")), []byte("12345.5"), []byte("-Infinity"), 1),
			"m.json: tree 0, node 1: numeric split_condition is -Inf"},
		{"cycle", mutateXGB(t, func(tree, _ map[string]any) { tree["left_children"].([]any)[1] = 0 }),
			"m.json: tree 0, node 1: child 0 is reached twice"},
		{"child out of range", mutateXGB(t, func(tree, _ map[string]any) { tree["right_children"].([]any)[0] = 999 }),
			"m.json: tree 0, node 0: right_children is 999, outside [-1,"},
		{"half leaf", mutateXGB(t, func(tree, _ map[string]any) { tree["right_children"].([]any)[0] = -1 }),
			"m.json: tree 0, node 0: right is -1 (a leaf) but left is 1"},
		{"feature out of range", mutateXGB(t, func(tree, _ map[string]any) { tree["split_indices"].([]any)[0] = 50 }),
			"m.json: tree 0, node 0: splits on feature 50, but the model has features 0 to 9"},
		{"short array", mutateXGB(t, func(tree, _ map[string]any) {
			tree["default_left"] = tree["default_left"].([]any)[1:]
		}), "m.json: tree 0: \"default_left\" is missing or not one per node"},
		{"objective", mutateXGB(t, func(_, doc map[string]any) {
			doc["learner"].(map[string]any)["objective"].(map[string]any)["name"] = "reg:made_up"
		}), "m.json: objective \"reg:made_up\" is not supported\nhint: sawmill reads binary:hinge"},
		{"base score", mutateXGB(t, func(_, doc map[string]any) {
			doc["learner"].(map[string]any)["learner_model_param"].(map[string]any)["base_score"] = "[abc]"
		}), "m.json: learner_model_param.base_score is \"[abc]\""},
		{"logistic base score", mutateXGB(t, func(_, doc map[string]any) {
			doc["learner"].(map[string]any)["learner_model_param"].(map[string]any)["base_score"] = "[1.5E0]"
		}), "m.json: binary:logistic: base_score 1.5 is not a probability in (0, 1)"},
		{"deep json", []byte(`{"learner":` + strings.Repeat("[", 100000)), "m.json: line 1, column 76: nested more than 64 deep"},
		{"truncated json", xgbFile(t, "x3_binary_logistic", "model.json")[:5000], "m.json: line 1, column 5001: unexpected end of file"},
		{"deep ubjson", []byte("{L\x00\x00\x00\x00\x00\x00\x00\x07learner" + strings.Repeat("[", 100000)), "m.json: byte 81: nested more than 64 deep"},
		{"huge ubjson length", []byte("{L\x00\x00\x00\x00\x00\x00\x00\x07learner[$d#L\x00\x00\x01\x00\x00\x00\x00\x00"),
			"m.json: byte 30: declared length 1099511627776 does not fit in the 0 bytes left"},
		{"huge ubjson key", []byte("{L\x00\x00\x00\x00\x00\x00\x00\x07learner{L\x7f\xff\xff\xff\xff\xff\xff\xff"),
			"does not fit in the 0 bytes left"},
		{"negative ubjson length", []byte("{L\x00\x00\x00\x00\x00\x00\x00\x07learnerSi\xff"),
			"m.json: byte 20: declared length -1 does not fit"},
		{"gblinear", xgbFile(t, "x3_refuse_gblinear", "model.json"),
			"m.json: booster gblinear (a linear model) has no trees: sawmill compiles tree ensembles only\nhint:"},
		{"gblinear 1.7", xgbFile(t, "x17_refuse_gblinear", "model.json"), "m.json: booster gblinear"},
		{"vector leaf", xgbFile(t, "x3_refuse_vector_leaf", "model.json"),
			"m.json: tree 0: vector leaves (size_leaf_vector 2, a multi_strategy=\"multi_output_tree\" model) are not supported\nhint:"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Decode(c.data, "m.json", "", Options{})
			require.Error(t, err)
			require.Contains(t, err.Error(), c.want)
			require.True(t, strings.HasPrefix(err.Error(), "m.json: "), err.Error())
		})
	}
}

// TestXGBoostTruncated cuts a model at every length (JSON every 97 bytes,
// UBJSON every byte): each prefix is refused with the file's name, none
// panics.
func TestXGBoostTruncated(t *testing.T) {
	for _, c := range []struct {
		file string
		step int
	}{{"model.json", 97}, {"model.ubj", 1}} {
		data := xgbFile(t, "x3_categorical", c.file)
		from := "xgboost-json"
		if c.file == "model.ubj" {
			from = "xgboost-ubjson"
		}
		for n := 0; n < len(data); n += c.step {
			_, err := Decode(data[:n], "m", from, Options{})
			require.Error(t, err, "%s cut at %d", c.file, n)
			require.True(t, strings.HasPrefix(err.Error(), "m: "), err.Error())
		}
	}
}

// TestXGBoostDetect: each format accepts its own files only.
func TestXGBoostDetect(t *testing.T) {
	j := xgbFile(t, "x17_categorical", "model.json")
	u := xgbFile(t, "x17_categorical", "model.ubj")
	s, err := os.ReadFile(filepath.Join("..", "golden", "testdata", "edge-softmax", "model.json"))
	require.NoError(t, err)
	for _, c := range []struct {
		data []byte
		want string
	}{{j, "xgboost-json"}, {u, "xgboost-ubjson"}, {s, "sawmill"}} {
		f, err := Detect(c.data, "m")
		require.NoError(t, err)
		require.Equal(t, c.want, f.Name)
	}
	require.False(t, detectXGBJSON(s))
	require.False(t, detectXGBUBJSON(j))
	require.False(t, detectXGBJSON(u))
	require.False(t, sawmillFormat.Detect(j))
	require.False(t, sawmillFormat.Detect(u))
}

// TestXGBoostOptions: --features, --classes, --iterations and --missing.
func TestXGBoostOptions(t *testing.T) {
	data := xgbFile(t, "x3_multi_softprob", "model.json")
	r, err := Decode(data, "m", "", Options{})
	require.NoError(t, err)
	require.Equal(t, []string{"0", "1", "2"}, r.Forest.Classes)
	require.Len(t, r.Forest.Trees, 12)

	names := make([]string, len(r.Forest.Features))
	for i := range names {
		names[i] = "x" + string(rune('a'+i))
	}
	m := -999.0
	r, err = Decode(data, "m", "", Options{Features: names, Classes: []string{"a", "b", "c"}, Iterations: 2, Missing: &m})
	require.NoError(t, err)
	require.Equal(t, names, r.Forest.Features)
	require.Equal(t, []string{"a", "b", "c"}, r.Forest.Classes)
	require.Len(t, r.Forest.Trees, 6, "2 rounds of 3 classes")
	require.True(t, r.Forest.HasMissingValue)
	require.Equal(t, -999.0, r.Forest.MissingValue)
	require.Contains(t, strings.Join(r.Notes, "\n"), "kept the first 2 of 4 rounds (--iterations)")

	_, err = Decode(data, "m", "", Options{Iterations: 5})
	require.EqualError(t, err, "m: --iterations 5, but the model has 4 rounds")
	_, err = Decode(data, "m", "", Options{Classes: []string{"a"}})
	require.EqualError(t, err, "m: --classes names 1 classes, the model has 3")

	// early stopping: the file's best_iteration is honoured
	var meta struct {
		BestIteration int `json:"best_iteration"`
	}
	require.NoError(t, json.Unmarshal(xgbFile(t, "x3_early_stop", "meta.json"), &meta))
	all, err := Decode(xgbFile(t, "x3_early_stop", "model.json"), "m", "", Options{Iterations: 1})
	require.NoError(t, err)
	total := 0
	for _, n := range all.Notes {
		fmt.Sscanf(n, "kept the first 1 of %d rounds", &total)
	}
	b := meta.BestIteration
	require.Less(t, b+1, total, "the fixture stopped early")
	r, err = Decode(xgbFile(t, "x3_early_stop", "model.json"), "m", "", Options{})
	require.NoError(t, err)
	require.Len(t, r.Forest.Trees, b+1)
	require.Contains(t, strings.Join(r.Notes, "\n"), fmt.Sprintf("kept the first %d of %d rounds: the file's best_iteration is %d", b+1, total, b))
	r, err = Decode(xgbFile(t, "x3_early_stop", "model.json"), "m", "", Options{Iterations: total})
	require.NoError(t, err)
	require.Len(t, r.Forest.Trees, total)

	// num_parallel_tree: a round is 3 trees
	r, err = Decode(xgbFile(t, "x3_parallel_tree", "model.json"), "m", "", Options{Iterations: 1})
	require.NoError(t, err)
	require.Len(t, r.Forest.Trees, 3)

	// hinge imports its raw score with a warning naming what was left out
	r, err = Decode(xgbFile(t, "x3_binary_hinge", "model.json"), "m", "", Options{})
	require.NoError(t, err)
	require.Contains(t, strings.Join(r.Notes, "\n"), "warning: binary:hinge: the output is the raw score; XGBoost's 0/1 step")
}
