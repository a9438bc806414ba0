package source

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/forest"
)

// XGBoost's model files, JSON and UBJSON, of versions 1.x to 3.x: one
// document {"learner": {...}, "version": [major, minor, patch]} with the
// objective, the booster (gbtree, dart, or gblinear, which has no trees) and
// its trees as parallel arrays. What follows was established by predicting
// with the library (xgboost 1.7.4, 2.1.4 and 3.2.0; see scripts/xgboost_fixtures.py
// and the fixtures under testdata/xgboost) rather than from its documentation:
//
//   - A numeric split sends x left when float32(x) < split_condition, in
//     float32; missing (NaN) goes to the default child. sawmill's x <= t is
//     made exact by t = the largest float32 below split_condition, with
//     input_precision float32.
//   - A categorical split (split_type 1) sends the categories it lists
//     right, and every other value left: unlisted and unseen categories,
//     negative values and values of 2^24 and above. sawmill's set split
//     sends members left, so the children are swapped; under category_match
//     floor the values XGBoost treats as invalid are never members, so they
//     go (after the swap) to XGBoost's left child as they should.
//   - Leaf values are the split_conditions of leaves (float32); the margin
//     starts at the base score taken through the objective's link in float32
//     (logit for the logistic objectives, log for the log-link ones) and adds
//     the leaves in float32, tree by tree. dart multiplies each tree's leaves
//     by its weight_drop in float32 before adding.
//   - The base score is stored in learner_model_param as a string: "5E-1"
//     in 1.x, "[5E-1]" in 3.x, and "[a,b,c]" (one per output) for
//     multi-output models in 3.x.

// Formats read by this file.
var (
	xgboostJSONFormat = xgbFormat("xgboost-json",
		"XGBoost's JSON model file (Booster.save_model(\"model.json\"), versions 1.x to 3.x)",
		detectXGBJSON, parseXGBJSON)
	xgboostUBJSONFormat = xgbFormat("xgboost-ubjson",
		"XGBoost's UBJSON model file (Booster.save_model(\"model.ubj\"), versions 1.6 to 3.x)",
		detectXGBUBJSON, parseUBJSON)
)

// xgbFormat is the Format of one encoding of XGBoost's model document.
func xgbFormat(name, describe string, detect func([]byte) bool, parse func([]byte) (xval, error)) Format {
	return Format{Name: name, Describe: describe, Detect: detect,
		Read: func(data []byte, file string, o Options) (*Result, error) {
			doc, err := parse(data)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", file, err)
			}
			return readXGBoost(&doc, len(data), file, name, o)
		},
	}
}

// detectXGBJSON accepts a JSON object whose first key is "learner" or
// "version", the two top-level keys of every XGBoost model document.
func detectXGBJSON(data []byte) bool {
	if !jsonObject(data) {
		return false
	}
	t := bytes.TrimLeft(data, " \t\r\n\ufeff")
	t = bytes.TrimLeft(t[1:], " \t\r\n")
	return bytes.HasPrefix(t, []byte(`"learner"`)) || bytes.HasPrefix(t, []byte(`"version"`))
}

// detectXGBUBJSON accepts a UBJSON object whose first key is "learner" or
// "version": '{', an integer marker and length, then the key's bytes.
func detectXGBUBJSON(data []byte) bool {
	if len(data) < 3 || data[0] != '{' {
		return false
	}
	n := size(data[1])
	if n == 0 || data[1] == 'd' || data[1] == 'D' || len(data) < 2+n {
		return false
	}
	k := data[2+n:]
	return bytes.HasPrefix(k, []byte("learner")) || bytes.HasPrefix(k, []byte("version"))
}

// xgbObjective is what sawmill needs to know of one XGBoost objective.
type xgbObjective struct {
	task      forest.Task
	transform forest.Transform
	link      string // how the stored base score becomes a margin: "", "logit" or "log"
	note      string // what a user should know about the import
	warn      bool   // note is a warning: something was left out
}

var xgbObjectives = map[string]xgbObjective{
	"binary:logistic":      {task: forest.Classification, transform: forest.Logistic, link: "logit"},
	"binary:logitraw":      {task: forest.Regression, note: "binary:logitraw: the output is XGBoost's raw margin (its prediction); class 1 when it is above 0"},
	"binary:hinge":         {task: forest.Regression, warn: true, note: "warning: binary:hinge: the output is the raw score; XGBoost's 0/1 step (1 when the score is above 0) was left out"},
	"multi:softprob":       {task: forest.Classification, transform: forest.Softmax},
	"multi:softmax":        {task: forest.Classification, transform: forest.Softmax, note: "multi:softmax: the outputs are the class probabilities (softprob); XGBoost's prediction is their argmax, sawmill's class"},
	"reg:squarederror":     {task: forest.Regression},
	"reg:linear":           {task: forest.Regression},
	"reg:squaredlogerror":  {task: forest.Regression},
	"reg:logistic":         {task: forest.Regression, transform: forest.Logistic, link: "logit"},
	"reg:pseudohubererror": {task: forest.Regression},
	"reg:absoluteerror":    {task: forest.Regression},
	"reg:quantileerror":    {task: forest.Regression},
	"count:poisson":        {task: forest.Regression, transform: forest.Exp, link: "log"},
	"reg:gamma":            {task: forest.Regression, transform: forest.Exp, link: "log"},
	"reg:tweedie":          {task: forest.Regression, transform: forest.Exp, link: "log"},
	"survival:cox":         {task: forest.Regression, transform: forest.Exp, link: "log"},
	"rank:pairwise":        {task: forest.Regression, note: "rank:pairwise: the output is the raw ranking score"},
	"rank:ndcg":            {task: forest.Regression, note: "rank:ndcg: the output is the raw ranking score"},
	"rank:map":             {task: forest.Regression, note: "rank:map: the output is the raw ranking score"},
}

// xgbTree is one tree as XGBoost stores it.
type xgbTree struct {
	left, right, feature []int
	cond                 []float32
	defaultLeft          []bool
	cats                 [][]int32 // per node: nil, or the categories of a categorical split
}

// xgbModel is an XGBoost model document, checked and in Go types.
type xgbModel struct {
	version    string
	objective  string
	booster    string
	numFeature int
	numOutput  int
	baseScore  []float32 // as stored (probability space for logistic objectives)
	features   []string
	trees      []xgbTree
	treeInfo   []int
	weightDrop []float32 // dart only
	perRound   int       // trees per boosting round
	best       int       // best_iteration from the attributes, -1 when absent
	catsCoded  bool      // 3.x: the model recodes category names (its "cats" encoder is not empty)
}

// xgbError builds "name: what" errors with a hint where one helps.
func xgbErr(name, format string, a ...any) error {
	return fmt.Errorf("%s: %s", name, fmt.Sprintf(format, a...))
}

func readXGBoost(doc *xval, fileSize int, name, format string, o Options) (*Result, error) {
	m, err := decodeXGB(doc, name, fileSize)
	if err != nil {
		return nil, err
	}
	return m.forest(name, format, o)
}

// str reads a member that XGBoost writes as a string ("num_class": "3").
func str(v *xval) (string, bool) {
	if v == nil {
		return "", false
	}
	switch v.k {
	case xStr:
		return v.s, true
	case xNum:
		return strconv.FormatFloat(v.n, 'g', -1, 64), true
	}
	return "", false
}

// intField reads a non-negative integer written as a string or a number.
func intField(v *xval, name, what string, def int) (int, error) {
	s, ok := str(v)
	if !ok {
		if v == nil {
			return def, nil
		}
		return 0, xgbErr(name, "%s is not a number", what)
	}
	n, err := strconv.Atoi(s)
	if err != nil || n < 0 {
		return 0, xgbErr(name, "%s is %q, not a non-negative integer", what, s)
	}
	return n, nil
}

// ints converts an array member of n entries to ints in [lo, hi). perNode
// says the array has an entry per node of a tree (messages then name the
// node); otherwise they name the entry.
func ints(v *xval, n int, at, key string, lo, hi int, perNode bool) ([]int, error) {
	if v == nil || v.k != xArr {
		return nil, fmt.Errorf("%s: %q is missing or not an array", at, key)
	}
	if v.length() != n {
		want := fmt.Sprintf("%d", n)
		if perNode {
			want = fmt.Sprintf("one per node, %d", n)
		}
		return nil, fmt.Errorf("%s: %q has %d entries, want %s", at, key, v.length(), want)
	}
	if v.nums == nil {
		return nil, fmt.Errorf("%s: %q holds something other than numbers", at, key)
	}
	out := make([]int, n)
	for i, f := range v.nums {
		if f != math.Trunc(f) || f < float64(lo) || f >= float64(hi) {
			if perNode {
				return nil, fmt.Errorf("%s, node %d: %s is %v, outside [%d, %d)", at, i, key, f, lo, hi)
			}
			return nil, fmt.Errorf("%s: %s[%d] is %v, outside [%d, %d)", at, key, i, f, lo, hi)
		}
		out[i] = int(f)
	}
	return out, nil
}

// parseBaseScore reads "5E-1", "[5E-1]" or "[a,b,c]", each a float32.
func parseBaseScore(s string) ([]float32, error) {
	t := strings.TrimSpace(s)
	if strings.HasPrefix(t, "[") && strings.HasSuffix(t, "]") {
		t = t[1 : len(t)-1]
	}
	var out []float32
	for _, p := range strings.Split(t, ",") {
		f, err := strconv.ParseFloat(strings.TrimSpace(p), 32)
		if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
			return nil, fmt.Errorf("base_score is %q, not a finite number or list of them", s)
		}
		out = append(out, float32(f))
	}
	return out, nil
}

func decodeXGB(doc *xval, name string, fileSize int) (*xgbModel, error) {
	m := &xgbModel{best: -1}
	if v := doc.get("version"); v != nil && v.nums != nil {
		parts := make([]string, len(v.nums))
		for i, n := range v.nums {
			parts[i] = strconv.FormatFloat(n, 'f', -1, 64)
		}
		m.version = strings.Join(parts, ".")
	}
	l := doc.get("learner")
	if l == nil || l.k != xObj {
		return nil, xgbErr(name, "no \"learner\" object: not an XGBoost model document")
	}
	obj := l.get("objective")
	m.objective, _ = str(obj.get("name"))
	if _, ok := xgbObjectives[m.objective]; !ok {
		return nil, xgbErr(name, "objective %q is not supported\nhint: sawmill reads %s", m.objective, strings.Join(xgbObjectiveNames(), ", "))
	}
	mp := l.get("learner_model_param")
	var err error
	if m.numFeature, err = intField(mp.get("num_feature"), name, "learner_model_param.num_feature", 0); err != nil {
		return nil, err
	}
	numClass, err := intField(mp.get("num_class"), name, "learner_model_param.num_class", 0)
	if err != nil {
		return nil, err
	}
	numTarget, err := intField(mp.get("num_target"), name, "learner_model_param.num_target", 1)
	if err != nil {
		return nil, err
	}
	// A model names or numbers every feature: allow many more features than
	// the file has bytes only up to 2^16, so that a damaged count cannot
	// make sawmill allocate far beyond the file's size.
	if m.numFeature == 0 || m.numFeature > max(1<<16, 8*fileSize) {
		return nil, xgbErr(name, "learner_model_param.num_feature is %d, out of proportion to the file", m.numFeature)
	}
	m.numOutput = max(numClass, numTarget, 1)
	if m.numOutput > 1<<16 {
		return nil, xgbErr(name, "the model has %d outputs, more than sawmill handles (%d)", m.numOutput, 1<<16)
	}
	bs, ok := str(mp.get("base_score"))
	if !ok {
		return nil, xgbErr(name, "learner_model_param.base_score is missing")
	}
	if m.baseScore, err = parseBaseScore(bs); err != nil {
		return nil, xgbErr(name, "learner_model_param.%v", err)
	}
	if len(m.baseScore) != 1 && len(m.baseScore) != m.numOutput {
		return nil, xgbErr(name, "learner_model_param.base_score has %d entries, the model has %d outputs", len(m.baseScore), m.numOutput)
	}
	if fn := l.get("feature_names"); fn != nil && fn.length() > 0 {
		if fn.length() != m.numFeature || fn.nums != nil {
			return nil, xgbErr(name, "learner.feature_names has %d names, the model has %d features", fn.length(), m.numFeature)
		}
		for i := range fn.items {
			if fn.items[i].k != xStr {
				return nil, xgbErr(name, "learner.feature_names[%d] is not a string", i)
			}
			m.features = append(m.features, fn.items[i].s)
		}
	}
	if a := l.get("attributes"); a != nil {
		if s, ok := str(a.get("best_iteration")); ok {
			if m.best, err = strconv.Atoi(s); err != nil || m.best < 0 {
				return nil, xgbErr(name, "attributes.best_iteration is %q, not a non-negative integer", s)
			}
		}
	}

	gb := l.get("gradient_booster")
	m.booster, _ = str(gb.get("name"))
	switch m.booster {
	case "gbtree":
	case "dart":
		wd := gb.get("weight_drop")
		if wd == nil || wd.nums == nil {
			return nil, xgbErr(name, "dart booster without a numeric \"weight_drop\" array")
		}
		for _, w := range wd.nums {
			m.weightDrop = append(m.weightDrop, float32(w))
		}
		gb = gb.get("gbtree")
	case "gblinear":
		return nil, xgbErr(name, "booster gblinear (a linear model) has no trees: sawmill compiles tree ensembles only\nhint: train with booster=\"gbtree\" or \"dart\"")
	default:
		return nil, xgbErr(name, "booster %q is not supported (sawmill reads gbtree and dart)", m.booster)
	}
	model := gb.get("model")
	if model == nil || model.k != xObj {
		return nil, xgbErr(name, "gradient_booster has no \"model\" object")
	}
	gp := model.get("gbtree_model_param")
	npt, err := intField(gp.get("num_parallel_tree"), name, "gbtree_model_param.num_parallel_tree", 1)
	if err != nil {
		return nil, err
	}
	if c := model.get("cats"); c != nil && c.get("enc").length() > 0 {
		m.catsCoded = true
	}
	trees := model.get("trees")
	if trees == nil || trees.k != xArr || trees.nums != nil && len(trees.nums) > 0 {
		return nil, xgbErr(name, "gradient_booster.model.trees is missing or not an array of trees")
	}
	nt := len(trees.items)
	if nt == 0 {
		return nil, xgbErr(name, "the model has no trees")
	}
	if m.weightDrop != nil && len(m.weightDrop) != nt {
		return nil, xgbErr(name, "dart weight_drop has %d entries for %d trees", len(m.weightDrop), nt)
	}
	ti := model.get("tree_info")
	if ti.length() != nt {
		return nil, xgbErr(name, "tree_info has %d entries for %d trees", ti.length(), nt)
	}
	if m.treeInfo, err = ints(ti, nt, name, "tree_info", 0, m.numOutput, false); err != nil {
		return nil, err
	}
	m.perRound = max(npt, 1) * m.numOutput
	if ip := model.get("iteration_indptr"); ip != nil && ip.nums != nil && len(ip.nums) > 1 {
		// 3.x records where each round's trees start; every round must
		// hold the same number for --iterations to mean rounds.
		step := ip.nums[1] - ip.nums[0]
		for i := 1; i < len(ip.nums); i++ {
			if ip.nums[i]-ip.nums[i-1] != step {
				step = -1
				break
			}
		}
		if step >= 1 && step == math.Trunc(step) && step <= float64(nt) {
			m.perRound = int(step)
		}
	}
	m.trees = make([]xgbTree, nt)
	for i := range trees.items {
		if err := m.tree(&trees.items[i], i, name); err != nil {
			return nil, err
		}
	}
	return m, nil
}

func xgbObjectiveNames() []string {
	var names []string
	for k := range xgbObjectives {
		names = append(names, k)
	}
	slices.Sort(names)
	return names
}

// tree reads tree ti of the document.
func (m *xgbModel) tree(v *xval, ti int, name string) error {
	at := fmt.Sprintf("%s: tree %d", name, ti)
	if v.k != xObj {
		return fmt.Errorf("%s: not an object", at)
	}
	tp := v.get("tree_param")
	if s, _ := str(tp.get("size_leaf_vector")); s != "" && s != "0" && s != "1" {
		return fmt.Errorf("%s: vector leaves (size_leaf_vector %s, a multi_strategy=\"multi_output_tree\" model) are not supported\nhint: train with multi_strategy=\"one_output_per_tree\", which sawmill reads", at, s)
	}
	n := v.get("left_children").length()
	if n == 0 {
		return fmt.Errorf("%s: no nodes", at)
	}
	if s, ok := str(tp.get("num_nodes")); ok && s != strconv.Itoa(n) {
		return fmt.Errorf("%s: num_nodes is %s but left_children has %d entries", at, s, n)
	}
	t := &m.trees[ti]
	var err error
	if t.left, err = ints(v.get("left_children"), n, at, "left_children", -1, n, true); err != nil {
		return err
	}
	if t.right, err = ints(v.get("right_children"), n, at, "right_children", -1, n, true); err != nil {
		return err
	}
	if t.feature, err = ints(v.get("split_indices"), n, at, "split_indices", 0, 1<<31, true); err != nil {
		return err
	}
	conds := v.get("split_conditions")
	if conds == nil || conds.nums == nil || len(conds.nums) != n {
		return fmt.Errorf("%s: \"split_conditions\" is missing, not numbers, or not one per node", at)
	}
	t.cond = make([]float32, n)
	for i, c := range conds.nums {
		t.cond[i] = float32(c)
	}
	t.defaultLeft = make([]bool, n)
	switch dl := v.get("default_left"); {
	case dl != nil && dl.nums != nil && len(dl.nums) == n:
		for i, d := range dl.nums {
			t.defaultLeft[i] = d != 0
		}
	case dl != nil && dl.length() == n:
		for i := range dl.items {
			if dl.items[i].k != xBool {
				return fmt.Errorf("%s, node %d: default_left is neither a number nor a boolean", at, i)
			}
			t.defaultLeft[i] = dl.items[i].b
		}
	default:
		return fmt.Errorf("%s: \"default_left\" is missing or not one per node", at)
	}
	st := v.get("split_type")
	if st == nil || st.length() == 0 {
		return nil // 1.x before categorical support: every split numeric
	}
	types, err := ints(st, n, at, "split_type", 0, 2, true)
	if err != nil {
		return err
	}
	nodes, err := ints(v.get("categories_nodes"), v.get("categories_nodes").length(), at, "categories_nodes", 0, n, false)
	if err != nil {
		return err
	}
	segs, err := ints(v.get("categories_segments"), len(nodes), at, "categories_segments", 0, math.MaxInt32, false)
	if err != nil {
		return err
	}
	sizes, err := ints(v.get("categories_sizes"), len(nodes), at, "categories_sizes", 0, math.MaxInt32, false)
	if err != nil {
		return err
	}
	all := v.get("categories")
	if all == nil || all.nums == nil {
		return fmt.Errorf("%s: \"categories\" is missing or not numbers", at)
	}
	if len(nodes) > 0 {
		t.cats = make([][]int32, n)
	}
	for j, node := range nodes {
		if types[node] != 1 {
			return fmt.Errorf("%s, node %d: has categories but split_type %d (numeric)", at, node, types[node])
		}
		lo, hi := segs[j], segs[j]+sizes[j]
		if hi > len(all.nums) {
			return fmt.Errorf("%s, node %d: categories segment [%d, %d) runs past the %d categories stored", at, node, lo, hi, len(all.nums))
		}
		list := make([]int32, 0, hi-lo)
		for _, c := range all.nums[lo:hi] {
			// XGBoost treats an input of 2^24 or more as no category at
			// all, so a listed category must lie below it (and floor
			// matching then agrees with XGBoost on every input).
			if c != math.Trunc(c) || c < 0 || c >= 1<<24 {
				return fmt.Errorf("%s, node %d: category %v is not an integer in [0, 2^24)", at, node, c)
			}
			if len(list) > 0 && int32(c) <= list[len(list)-1] {
				return fmt.Errorf("%s, node %d: categories are not sorted and distinct (%v after %d)", at, node, c, list[len(list)-1])
			}
			list = append(list, int32(c))
		}
		t.cats[node] = list
	}
	for i, ty := range types {
		if ty == 1 && (t.cats == nil || t.cats[i] == nil) && t.left[i] != -1 {
			return fmt.Errorf("%s, node %d: categorical split without categories", at, i)
		}
	}
	return nil
}

// prev32 is the largest float32 below c (c finite): x < c is x <= prev32(c)
// for every float32 x.
func prev32(c float32) float32 {
	return math.Nextafter32(c, float32(math.Inf(-1)))
}

// margin32 turns a stored base score into a margin through the objective's
// link, in float32 as XGBoost computes it.
func margin32(b float32, link string) (float32, error) {
	switch link {
	case "logit":
		// -log(1/p - 1), the objectives' ProbToMargin: one float32 division
		// and subtraction, then the logarithm rounded to float32.
		if !(b > 0 && b < 1) {
			return 0, fmt.Errorf("base_score %v is not a probability in (0, 1)", b)
		}
		d := float32(float32(1)/b) - 1
		return float32(-math.Log(float64(d))), nil
	case "log":
		if !(b > 0) {
			return 0, fmt.Errorf("base_score %v is not positive", b)
		}
		return float32(math.Log(float64(b))), nil
	}
	return b, nil
}

// forest converts the model: a float32 forest whose interpreter reproduces
// XGBoost's margins bit for bit.
func (m *xgbModel) forest(name, format string, o Options) (*Result, error) {
	obj := xgbObjectives[m.objective]
	var notes []string
	if obj.note != "" {
		notes = append(notes, obj.note)
	}
	k := m.numOutput
	f := &forest.Forest{
		Task:           obj.task,
		InputPrecision: forest.Float32,
		Accumulate:     forest.Float32,
		Combine:        forest.Sum,
		Transform:      obj.transform,
		// XGBoost takes a category as the integer part of a value >= 0
		// below 2^24 and treats every other value as unlisted: floor.
		CategoryMatch: forest.MatchFloor,
	}
	if f.Transform == "" {
		f.Transform = forest.NoTransform
	}
	if obj.task == forest.Classification {
		if m.objective == "binary:logistic" {
			if k != 1 {
				return nil, xgbErr(name, "binary:logistic with %d outputs", k)
			}
			f.Classes = []string{"0", "1"}
		} else {
			if k < 2 {
				return nil, xgbErr(name, "%s with %d classes: a classifier needs at least two", m.objective, k)
			}
			for c := 0; c < k; c++ {
				f.Classes = append(f.Classes, strconv.Itoa(c))
			}
		}
		if o.Classes != nil {
			if len(o.Classes) != len(f.Classes) {
				return nil, xgbErr(name, "--classes names %d classes, the model has %d", len(o.Classes), len(f.Classes))
			}
			f.Classes = o.Classes
		}
	} else {
		if o.Classes != nil {
			return nil, xgbErr(name, "--classes given, but %s is not a classifier", m.objective)
		}
		if k > 1 {
			f.Outputs = k
		}
	}
	switch {
	case o.Features != nil:
		if len(o.Features) != m.numFeature {
			return nil, xgbErr(name, "--features names %d features, the model has %d", len(o.Features), m.numFeature)
		}
		f.Features = o.Features
	case m.features != nil:
		f.Features = m.features
	default:
		for i := 0; i < m.numFeature; i++ {
			f.Features = append(f.Features, "f"+strconv.Itoa(i)) // XGBoost's own default names
		}
		notes = append(notes, "the file names no features: called f0, f1, ... as XGBoost does (--features names them)")
	}
	for j := 0; j < k; j++ {
		b := m.baseScore[0]
		if len(m.baseScore) == k {
			b = m.baseScore[j]
		}
		z, err := margin32(b, obj.link)
		if err != nil {
			return nil, xgbErr(name, "%s: %v", m.objective, err)
		}
		f.BaseScore = append(f.BaseScore, float64(z))
	}
	// XGBoost compares float32 inputs with a float32 missing value.
	if note, err := o.missing32(f, name); err != nil {
		return nil, err
	} else if note != "" {
		notes = append(notes, note)
	}

	nt := len(m.trees)
	if nt%m.perRound != 0 {
		return nil, xgbErr(name, "%d trees do not make whole rounds of %d", nt, m.perRound)
	}
	rounds := nt / m.perRound
	keep := rounds
	switch {
	case o.Iterations > 0:
		if o.Iterations > rounds {
			return nil, xgbErr(name, "--iterations %d, but the model has %d rounds", o.Iterations, rounds)
		}
		keep = o.Iterations
	case m.best >= 0 && m.best+1 < rounds:
		keep = m.best + 1
		notes = append(notes, fmt.Sprintf("kept the first %d of %d rounds: the file's best_iteration is %d (--iterations chooses)", keep, rounds, m.best))
	}
	if keep < rounds && o.Iterations > 0 {
		notes = append(notes, fmt.Sprintf("kept the first %d of %d rounds (--iterations)", keep, rounds))
	}

	strict, sets := 0, 0
	f.Trees = make([]forest.Tree, keep*m.perRound)
	for ti := range f.Trees {
		xt := &m.trees[ti]
		n := len(xt.left)
		t := forest.Tree{
			Feature:     make([]int, n),
			Threshold:   make([]float64, n),
			Left:        xt.left,
			Right:       xt.right,
			MissingLeft: xt.defaultLeft,
			Value:       make([]float64, n),
		}
		if k > 1 {
			t.HasOutput, t.Output = true, m.treeInfo[ti]
		}
		if xt.cats != nil {
			t.Categories = make([][]int32, n)
		}
		w := float32(1)
		if m.weightDrop != nil {
			w = m.weightDrop[ti]
		}
		at := func(i int) string { return fmt.Sprintf("%s: tree %d, node %d", name, ti, i) }
		for i := 0; i < n; i++ {
			c := xt.cond[i]
			if xt.left[i] == -1 {
				if xt.right[i] != -1 {
					return nil, fmt.Errorf("%s: left is -1 (a leaf) but right is %d", at(i), xt.right[i])
				}
				leaf := c
				if m.weightDrop != nil {
					leaf = w * c // dart: one float32 multiplication
				}
				if math.IsNaN(float64(leaf)) || math.IsInf(float64(leaf), 0) {
					return nil, fmt.Errorf("%s: leaf value is %v", at(i), leaf)
				}
				t.Feature[i] = -1
				t.Value[i] = float64(leaf)
				continue
			}
			if xt.right[i] == -1 {
				return nil, fmt.Errorf("%s: right is -1 (a leaf) but left is %d", at(i), xt.left[i])
			}
			if xt.feature[i] >= m.numFeature {
				return nil, fmt.Errorf("%s: splits on feature %d, but the model has features 0 to %d", at(i), xt.feature[i], m.numFeature-1)
			}
			t.Feature[i] = xt.feature[i]
			if xt.cats != nil && xt.cats[i] != nil {
				// XGBoost sends the listed categories right: swap.
				t.Categories[i] = xt.cats[i]
				t.Left = swapped(t.Left, xt.left, i, xt.right[i])
				t.Right = swapped(t.Right, xt.right, i, xt.left[i])
				t.MissingLeft = swappedBool(t.MissingLeft, xt.defaultLeft, i, !xt.defaultLeft[i])
				sets++
				continue
			}
			if math.IsNaN(float64(c)) || math.IsInf(float64(c), 0) {
				return nil, fmt.Errorf("%s: numeric split_condition is %v\nhint: the file is damaged; save the model again from XGBoost", at(i), c)
			}
			th := prev32(c)
			if math.IsInf(float64(th), 0) {
				return nil, fmt.Errorf("%s: split_condition %v is the lowest float32: no input but -Inf goes left, which sawmill cannot say", at(i), c)
			}
			t.Threshold[i] = float64(th)
			strict++
		}
		f.Trees[ti] = t
	}
	if strict > 0 {
		notes = append(notes, fmt.Sprintf("%d numeric splits x < t rewritten as x <= the largest float32 below t", strict))
	}
	if sets > 0 {
		notes = append(notes, fmt.Sprintf("%d categorical splits: XGBoost sends the listed categories right, so their children were swapped", sets))
	}
	if m.weightDrop != nil {
		notes = append(notes, "dart: each tree's leaves multiplied by its weight_drop in float32")
	}
	if m.catsCoded {
		notes = append(notes, "the model recodes category names: give each categorical input as XGBoost's category code")
	}
	prov := map[string]any{
		"source":    format,
		"xgboost":   m.version,
		"objective": m.objective,
		"booster":   m.booster,
		"rounds":    keep,
	}
	if m.best >= 0 {
		prov["best_iteration"] = m.best
	}
	pj, err := json.Marshal(prov)
	if err != nil {
		panic("BUG: provenance: " + err.Error())
	}
	f.Provenance = pj
	if err := f.Validate(name); err != nil {
		return nil, err
	}
	return &Result{Forest: f, Notes: notes}, nil
}

// swapped returns s with s[i] = v, copying s first when it still aliases
// orig (the decoded arrays are shared until a node needs a change).
func swapped(s, orig []int, i, v int) []int {
	if &s[0] == &orig[0] {
		s = append([]int(nil), orig...)
	}
	s[i] = v
	return s
}

func swappedBool(s, orig []bool, i int, v bool) []bool {
	if &s[0] == &orig[0] {
		s = append([]bool(nil), orig...)
	}
	s[i] = v
	return s
}
