package source

// The LightGBM reader: the text model file that Booster.save_model writes
// (format "version=v4" of LightGBM 4.x; v3 files read the same way).
//
// What LightGBM computes, measured against lightgbm 4.7.0 from the Python
// package index (scripts/lightgbm_fixtures.py, source/testdata/lightgbm), and
// how each rule is said in forest format 2:
//
//   - A numeric split sends x left when x <= threshold, in double. Before any
//     comparison, LightGBM's dense-row reader (c_api.cpp,
//     RowFunctionFromDenseMatric) drops every value with |x| <= kZeroThreshold
//     (1e-35f, widened: 1.0000000180025095e-35), so such a value is compared
//     as 0. That matters only for thresholds t in [-B, B) (B that bound), and
//     LightGBM writes t = -B itself where a feature has zeros: such a
//     threshold is moved to B when 0 <= t, else to the double just below -B,
//     which gives every input the same side (zeroThreshold).
//   - decision_type bit 0 is categorical, bit 1 default-left, bits 2-3 the
//     missing type: None (0), Zero (1), NaN (2). With None, NaN is compared
//     as 0: missing_left = (0 <= t) (default-left is ignored, as measured).
//     With Zero, NaN and |x| <= B are missing and go to the default side:
//     zero_missing. With NaN, only NaN is missing.
//   - A categorical split truncates the value toward zero (-0.5 is category
//     0) and sends it left when its bit is set in the node's cat_threshold
//     words; NaN goes right whatever the missing type and default-left bits
//     say (measured; LightGBM's tree.h reads as if NaN could be category 0
//     with missing type None), as do negatives (below -1), +-Inf and values
//     at or above 2^31 (also 2^32+3: no wrap-around): category_match
//     truncate, missing_left false.
//   - Leaf values already hold the shrinkage; tree i adds to output
//     i % num_tree_per_iteration; outputs start at 0 and are added in double;
//     boosting=rf ("average_output") divides the sum by the number of rounds
//     in predict(), but predict(raw_score=True) returns the undivided sum
//     (measured): the model averages, and --raw prints the average.
//   - The file does not record the best iteration of an early-stopped model
//     (a Booster loaded from it reports best_iteration -1): every tree in it
//     is used unless Options.Iterations says otherwise.

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/bits"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/forest"
)

var lightgbmFormat = Format{
	Name:     "lightgbm",
	Describe: "LightGBM's text model file (Booster.save_model)",
	Detect:   detectLightGBM,
	Read:     readLightGBM,
}

// detectLightGBM accepts a file whose first line is "tree" and whose second
// starts with "version=", as every LightGBM text model does.
func detectLightGBM(data []byte) bool {
	rest, ok := bytes.CutPrefix(data, []byte("tree"))
	if !ok {
		return false
	}
	rest = bytes.TrimPrefix(rest, []byte("\r"))
	rest, ok = bytes.CutPrefix(rest, []byte("\n"))
	return ok && bytes.HasPrefix(rest, []byte("version="))
}

// lgbZeroBound is LightGBM's kZeroThreshold (include/LightGBM/meta.h,
// 1e-35f) as the double it widens to: the format's ZeroMissingBound.
const lgbZeroBound = forest.ZeroMissingBound

// LightGBM's decision_type bits (include/LightGBM/tree.h).
const (
	lgbCategorical = 1
	lgbDefaultLeft = 2
	lgbMissingMask = 3 << 2
	lgbMissingNone = 0
	lgbMissingZero = 1 << 2
	lgbMissingNaN  = 2 << 2
)

// lgbLine is one "key=value" line of a block, with its line number.
type lgbLine struct {
	val  []byte
	line int
}

// lgbBlock is a header or a tree: its key=value lines, and bare flags.
type lgbBlock struct {
	keys  map[string]lgbLine
	flags map[string]int
	line  int // first line
}

// lgbModel is the file parsed into blocks, before any meaning is given.
type lgbModel struct {
	header lgbBlock
	trees  []lgbBlock
}

// lgbParse splits the file into its header and tree blocks. It allocates in
// proportion to the number of lines.
func lgbParse(data []byte, name string) (*lgbModel, error) {
	m := &lgbModel{header: lgbBlock{keys: map[string]lgbLine{}, flags: map[string]int{}, line: 1}}
	cur := &m.header
	lineNo := 0
	ended := false
	for len(data) > 0 && !ended {
		var ln []byte
		if i := bytes.IndexByte(data, '\n'); i >= 0 {
			ln, data = data[:i], data[i+1:]
		} else {
			ln, data = data, nil
		}
		lineNo++
		ln = bytes.TrimSuffix(ln, []byte("\r"))
		switch {
		case lineNo == 1:
			if string(ln) != "tree" {
				return nil, fmt.Errorf("%s:1: %q: a LightGBM text model starts with a line \"tree\"\nhint: save the model with Booster.save_model", name, clip(ln))
			}
			continue
		case len(ln) == 0:
			continue
		case string(ln) == "end of trees":
			ended = true
			continue
		}
		k, v, ok := bytes.Cut(ln, []byte("="))
		if !ok {
			cur.flags[string(ln)] = lineNo
			continue
		}
		if string(k) == "Tree" {
			id, err := strconv.Atoi(string(v))
			if err != nil || id != len(m.trees) {
				return nil, fmt.Errorf("%s:%d: %q: expected Tree=%d (trees are numbered from 0 in order)", name, lineNo, clip(ln), len(m.trees))
			}
			m.trees = append(m.trees, lgbBlock{keys: map[string]lgbLine{}, flags: map[string]int{}, line: lineNo})
			cur = &m.trees[len(m.trees)-1]
			continue
		}
		if _, dup := cur.keys[string(k)]; dup {
			return nil, fmt.Errorf("%s:%d: key %q given twice in the same block", name, lineNo, clip(k))
		}
		cur.keys[string(k)] = lgbLine{val: v, line: lineNo}
	}
	if !ended {
		return nil, fmt.Errorf("%s: the file ends before \"end of trees\" (after %d trees)\nhint: the file is truncated; save the model again", name, len(m.trees))
	}
	if len(m.trees) == 0 {
		return nil, fmt.Errorf("%s: the model has no trees", name)
	}
	return m, nil
}

// clip shortens text quoted in a message.
func clip(b []byte) string {
	if len(b) > 40 {
		return string(b[:40]) + "..."
	}
	return string(b)
}

// lgbReader reads values of one block, naming the file, block and key in
// its errors.
type lgbReader struct {
	name  string
	where string // "tree 3" or "header"
	b     *lgbBlock
}

func (r *lgbReader) errf(l lgbLine, key, format string, args ...any) error {
	return fmt.Errorf("%s:%d: %s: %s: %s", r.name, l.line, r.where, key, fmt.Sprintf(format, args...))
}

func (r *lgbReader) get(key string) (lgbLine, error) {
	l, ok := r.b.keys[key]
	if !ok {
		return l, fmt.Errorf("%s:%d: %s: %q is missing", r.name, r.b.line, r.where, key)
	}
	return l, nil
}

// int reads one integer in [lo, hi].
func (r *lgbReader) int(key string, lo, hi int64) (int64, error) {
	l, err := r.get(key)
	if err != nil {
		return 0, err
	}
	v, err := strconv.ParseInt(string(bytes.TrimSpace(l.val)), 10, 64)
	if err != nil || v < lo || v > hi {
		return 0, r.errf(l, key, "%q is not an integer in [%d, %d]", clip(l.val), lo, hi)
	}
	return v, nil
}

// fields calls fn for each space-separated field of key's value and checks
// there are exactly n of them (n < 0: any number).
func (r *lgbReader) fields(key string, n int, fn func(i int, s string) error) error {
	l, err := r.get(key)
	if err != nil {
		return err
	}
	i := 0
	for s := range strings.FieldsSeq(string(l.val)) {
		if n >= 0 && i >= n {
			return r.errf(l, key, "more than the %d values expected", n)
		}
		if err := fn(i, s); err != nil {
			return r.errf(l, key, "value %d: %v", i, err)
		}
		i++
	}
	if n >= 0 && i != n {
		return r.errf(l, key, "%d values, expected %d", i, n)
	}
	return nil
}

func (r *lgbReader) ints(key string, n int, lo, hi int64) ([]int, error) {
	out := make([]int, 0, max(n, 0))
	err := r.fields(key, n, func(_ int, s string) error {
		v, err := strconv.ParseInt(s, 10, 64)
		if err != nil || v < lo || v > hi {
			return fmt.Errorf("%q is not an integer in [%d, %d]", s, lo, hi)
		}
		out = append(out, int(v))
		return nil
	})
	return out, err
}

func (r *lgbReader) floats(key string, n int) ([]float64, error) {
	out := make([]float64, 0, max(n, 0))
	err := r.fields(key, n, func(_ int, s string) error {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%q is not a finite number", s)
		}
		out = append(out, v)
		return nil
	})
	return out, err
}

// lgbObjective is what an objective line means in format 2.
type lgbObjective struct {
	task      forest.Task
	transform forest.Transform
	scale     float64
	warn      string // what was left out, when the transform cannot be said
}

// lgbObjectiveOf reads "objective=NAME key:value ..." (the objective's
// ToString in LightGBM's src/objective/*.hpp).
func lgbObjectiveOf(val string) (lgbObjective, int, error) {
	f := strings.Fields(val)
	if len(f) == 0 {
		return lgbObjective{}, 0, fmt.Errorf("empty objective")
	}
	params := map[string]string{}
	for _, p := range f[1:] {
		k, v, _ := strings.Cut(p, ":")
		params[k] = v
	}
	sigmoid := 1.0
	if s, ok := params["sigmoid"]; ok {
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || !(v > 0) || math.IsInf(v, 0) {
			return lgbObjective{}, 0, fmt.Errorf("sigmoid %q is not a positive number", s)
		}
		sigmoid = v
	}
	classes := 0
	if s, ok := params["num_class"]; ok {
		v, err := strconv.Atoi(s)
		if err != nil || v < 2 {
			return lgbObjective{}, 0, fmt.Errorf("num_class %q is not an integer of at least 2", s)
		}
		classes = v
	}
	_, sqrt := params["sqrt"]
	o := lgbObjective{task: forest.Regression, transform: forest.NoTransform, scale: 1}
	switch f[0] {
	case "binary":
		o = lgbObjective{task: forest.Classification, transform: forest.Logistic, scale: sigmoid}
		classes = 2
	case "multiclass":
		o = lgbObjective{task: forest.Classification, transform: forest.Softmax, scale: 1}
	case "multiclassova":
		o = lgbObjective{task: forest.Classification, transform: forest.LogisticEach, scale: sigmoid}
	case "regression", "regression_l1", "huber", "fair", "quantile", "mape":
		if sqrt {
			// RegressionL2loss::ConvertOutput with sqrt_: sign(z)·z².
			o.warn = "the objective trains on sqrt(label) (reg_sqrt) and LightGBM predicts sign(z)*z^2, which the forest format cannot say: the model gives the raw score z"
		}
	case "poisson", "gamma", "tweedie":
		o.transform = forest.Exp
	case "cross_entropy":
		o.transform = forest.Logistic
	case "cross_entropy_lambda":
		// CrossEntropyLambda::ConvertOutput: log1p(exp(z)).
		o.warn = "LightGBM predicts log(1+exp(z)) for cross_entropy_lambda, which the forest format cannot say: the model gives the raw score z"
	case "lambdarank", "rank_xendcg":
	case "custom":
		o.warn = "the model was trained with a custom objective: the model gives the raw score"
	default:
		return lgbObjective{}, 0, fmt.Errorf("objective %q is not one this reader knows\nhint: known: binary, multiclass, multiclassova, regression, regression_l1, huber, fair, quantile, mape, poisson, gamma, tweedie, cross_entropy, cross_entropy_lambda, lambdarank, rank_xendcg", f[0])
	}
	if o.task == forest.Classification && classes < 2 {
		return lgbObjective{}, 0, fmt.Errorf("objective %q has no num_class", f[0])
	}
	return o, classes, nil
}

// lgbFloatBelow is the largest double below x.
func lgbFloatBelow(x float64) float64 { return math.Nextafter(x, math.Inf(-1)) }

// zeroThreshold returns the threshold t' with x <= t' exactly when
// LightGBM's x' <= t, where x' is x with |x| <= lgbZeroBound read as 0.
// Only thresholds inside [-B, B) move: there every value of the band goes
// where 0 goes.
func zeroThreshold(t float64) float64 {
	switch {
	case t >= lgbZeroBound || t < -lgbZeroBound:
		return t
	case t >= 0: // 0 <= t: the whole band goes left, x > B goes right
		return lgbZeroBound
	default: // the whole band goes right, x < -B goes left
		return lgbFloatBelow(-lgbZeroBound)
	}
}

// lgbStats counts the rewrites made, for Result.Notes.
type lgbStats struct {
	zeroBand, noneNaN, zeroMissing, categorical int
	// catBudget is how many more categories the set splits may list: the
	// file's size in bytes, so that 32 categories drawn from one word of
	// cat_threshold cannot make memory outgrow the file (LightGBM itself
	// lists at most max_cat_threshold, 32 by default, per split).
	catBudget int
}

func readLightGBM(data []byte, name string, o Options) (*Result, error) {
	m, err := lgbParse(data, name)
	if err != nil {
		return nil, err
	}
	h := &lgbReader{name: name, where: "header", b: &m.header}
	if l, err := h.get("version"); err != nil {
		return nil, err
	} else if v := string(l.val); v != "v4" && v != "v3" {
		return nil, h.errf(l, "version", "%q is not a version this reader knows\nhint: save the model with LightGBM 3 or 4 (version=v3 or v4)", clip(l.val))
	}
	nf, err := h.int("max_feature_idx", 0, 1<<24)
	if err != nil {
		return nil, err
	}
	nf++
	numClass, err := h.int("num_class", 1, 1<<16)
	if err != nil {
		return nil, err
	}
	perIter, err := h.int("num_tree_per_iteration", 1, 1<<16)
	if err != nil {
		return nil, err
	}
	objLine, err := h.get("objective")
	if err != nil {
		return nil, err
	}
	obj, classes, err := lgbObjectiveOf(string(objLine.val))
	if err != nil {
		return nil, h.errf(objLine, "objective", "%v", err)
	}
	outputs := 1
	if obj.task == forest.Classification && obj.transform != forest.Logistic {
		outputs = classes
	}
	if int64(outputs) != perIter || (classes > 2 && int64(classes) != numClass) {
		return nil, h.errf(objLine, "objective", "%d outputs, but num_class=%d and num_tree_per_iteration=%d", outputs, numClass, perIter)
	}
	var features []string
	if err := h.fields("feature_names", int(nf), func(_ int, s string) error {
		features = append(features, s)
		return nil
	}); err != nil {
		return nil, err
	}
	f := &forest.Forest{
		Task:           obj.task,
		Features:       features,
		InputPrecision: forest.Float64,
		Combine:        forest.Sum,
		Transform:      obj.transform,
		BaseScore:      make([]float64, outputs),
	}
	if obj.scale != 1 {
		f.TransformScale = obj.scale
	}
	if obj.task == forest.Classification {
		for c := range classes {
			f.Classes = append(f.Classes, strconv.Itoa(c))
		}
	}
	var notes []string
	if _, ok := m.header.flags["average_output"]; ok {
		f.Combine = forest.Average
		notes = append(notes, "boosting=rf: the trees' outputs are averaged (LightGBM's raw_score=True prints their sum; its predictions use the average)")
	}

	trees := m.trees
	if len(trees)%outputs != 0 {
		return nil, fmt.Errorf("%s: %d trees is not a whole number of rounds of %d trees", name, len(trees), outputs)
	}
	rounds := len(trees) / outputs
	switch it := o.Iterations; {
	case it < 0:
		return nil, fmt.Errorf("%s: iterations %d: want a positive number", name, it)
	case it > rounds:
		return nil, fmt.Errorf("%s: iterations %d: the model has %d rounds", name, it, rounds)
	case it > 0:
		trees = trees[:it*outputs]
		notes = append(notes, fmt.Sprintf("the first %d of %d rounds kept (as asked)", it, rounds))
	default:
		notes = append(notes, fmt.Sprintf("all %d rounds used (a LightGBM model file records no best iteration; the file holds what save_model was asked to save)", rounds))
	}

	maxNodes := o.Read.MaxNodes
	if maxNodes <= 0 {
		maxNodes = forest.DefaultMaxNodes
	}
	st := lgbStats{catBudget: len(data)}
	var total int64
	f.Trees = make([]forest.Tree, 0, len(trees))
	for ti := range trees {
		r := &lgbReader{name: name, where: fmt.Sprintf("tree %d", ti), b: &trees[ti]}
		t, err := lgbTree(r, ti, int(nf), &st)
		if err != nil {
			return nil, err
		}
		total += int64(t.NumNodes())
		if total > maxNodes {
			return nil, fmt.Errorf("%s: tree %d: more than %d nodes in all\nhint: raise the node limit if the model is meant to be this large", name, ti, maxNodes)
		}
		if outputs > 1 {
			t.HasOutput, t.Output = true, ti%outputs
		}
		f.Trees = append(f.Trees, t)
	}

	renamed, err := o.rename(f, name)
	if err != nil {
		return nil, err
	}
	notes = append(notes, renamed...)
	if o.Missing != nil {
		f.HasMissingValue, f.MissingValue = true, *o.Missing
		notes = append(notes, fmt.Sprintf("%s also counts as missing (goes where LightGBM sends NaN)", strconv.FormatFloat(*o.Missing, 'g', -1, 64)))
	}
	if st.zeroBand > 0 {
		notes = append(notes, fmt.Sprintf("%d thresholds in LightGBM's zero band moved to its edge (LightGBM reads |x| <= 1e-35 as 0)", st.zeroBand))
	}
	if st.noneNaN > 0 {
		notes = append(notes, fmt.Sprintf("%d splits of missing type None: NaN sent where 0 goes", st.noneNaN))
	}
	if st.zeroMissing > 0 {
		notes = append(notes, fmt.Sprintf("%d splits of missing type Zero: zero_missing", st.zeroMissing))
	}
	if st.categorical > 0 {
		f.CategoryMatch = forest.MatchTruncate
		notes = append(notes, fmt.Sprintf("%d categorical splits: categories truncated toward zero, NaN goes right", st.categorical))
	}
	if obj.warn != "" {
		notes = append(notes, "warning: "+obj.warn)
	}
	prov := map[string]any{
		"source":         "lightgbm",
		"format":         "LightGBM text model " + string(m.header.keys["version"].val),
		"objective":      string(objLine.val),
		"rounds":         len(trees) / outputs,
		"rounds_in_file": rounds,
		// The text file names no LightGBM release; its format version is
		// what it records.
		"library_version": "not recorded in the file",
	}
	if f.Provenance, err = json.Marshal(prov); err != nil {
		panic("BUG: provenance: " + err.Error())
	}
	if err := f.Validate(name); err != nil {
		return nil, err
	}
	return &Result{Forest: f, Notes: notes}, nil
}

// lgbTree converts one tree. LightGBM numbers its split nodes 0..L-2 and its
// leaves 0..L-1, a child < 0 being leaf ^child; here split i stays node i and
// leaf j becomes node L-1+j.
func lgbTree(r *lgbReader, ti, nf int, st *lgbStats) (forest.Tree, error) {
	if l, ok := r.b.keys["is_linear"]; ok && string(bytes.TrimSpace(l.val)) != "0" {
		return forest.Tree{}, fmt.Errorf("%s:%d: tree %d: a linear tree (is_linear=%s): its leaves hold linear models, which the forest format cannot say\nhint: train with linear_tree=false", r.name, l.line, ti, clip(l.val))
	}
	// The declared count is checked against the arrays before anything is
	// allocated by it: memory follows the file, not the claim.
	nl, err := r.int("num_leaves", 1, math.MaxInt32)
	if err != nil {
		return forest.Tree{}, err
	}
	leafLine, err := r.get("leaf_value")
	if err != nil {
		return forest.Tree{}, err
	}
	if int64(len(leafLine.val)) < nl { // each value takes at least one byte
		return forest.Tree{}, r.errf(leafLine, "leaf_value", "num_leaves=%d but the line has %d bytes", nl, len(leafLine.val))
	}
	L := int(nl)
	leaves, err := r.floats("leaf_value", L)
	if err != nil {
		return forest.Tree{}, err
	}
	S := L - 1
	n := S + L
	t := forest.Tree{
		Feature:     make([]int, n),
		Threshold:   make([]float64, n),
		Left:        make([]int, n),
		Right:       make([]int, n),
		MissingLeft: make([]bool, n),
		Value:       make([]float64, n),
	}
	for j, v := range leaves {
		t.Feature[S+j], t.Left[S+j], t.Right[S+j] = -1, -1, -1
		t.Value[S+j] = v
	}
	if S == 0 {
		return t, nil
	}
	feat, err := r.ints("split_feature", S, 0, int64(nf-1))
	if err != nil {
		return forest.Tree{}, err
	}
	thr, err := r.floats("threshold", S)
	if err != nil {
		return forest.Tree{}, err
	}
	dt, err := r.ints("decision_type", S, 0, 255)
	if err != nil {
		return forest.Tree{}, err
	}
	left, err := r.ints("left_child", S, -int64(L), int64(S-1))
	if err != nil {
		return forest.Tree{}, err
	}
	right, err := r.ints("right_child", S, -int64(L), int64(S-1))
	if err != nil {
		return forest.Tree{}, err
	}
	ncat, err := r.int("num_cat", 0, int64(S))
	if err != nil {
		return forest.Tree{}, err
	}
	var cats [][]int32
	if ncat > 0 {
		if cats, err = lgbBitsets(r, int(ncat), &st.catBudget); err != nil {
			return forest.Tree{}, err
		}
		t.Categories = make([][]int32, n)
	}
	child := func(c int) int {
		if c < 0 {
			return S + ^c
		}
		return c
	}
	for i := range S {
		t.Feature[i] = feat[i]
		t.Left[i], t.Right[i] = child(left[i]), child(right[i])
		d := dt[i]
		if d&^(lgbCategorical|lgbDefaultLeft|lgbMissingMask) != 0 || d&lgbMissingMask == lgbMissingMask {
			return forest.Tree{}, fmt.Errorf("%s: tree %d, node %d: decision_type %d has bits this reader does not know", r.name, ti, i, d)
		}
		if d&lgbCategorical != 0 {
			c := thr[i]
			if c != math.Trunc(c) || c < 0 || c >= float64(ncat) {
				return forest.Tree{}, fmt.Errorf("%s: tree %d, node %d: categorical split with threshold %v: not a bitset index below num_cat=%d", r.name, ti, i, c, ncat)
			}
			if cats == nil {
				return forest.Tree{}, fmt.Errorf("%s: tree %d, node %d: categorical split in a tree with num_cat=0", r.name, ti, i)
			}
			if cats[int(c)] == nil {
				return forest.Tree{}, fmt.Errorf("%s: tree %d, node %d: bitset %d is used by an earlier node too", r.name, ti, i, int(c))
			}
			t.Categories[i] = cats[int(c)]
			cats[int(c)] = nil // LightGBM gives every categorical split a bitset of its own
			t.Threshold[i] = 0
			t.MissingLeft[i] = false // NaN goes right (measured)
			st.categorical++
			continue
		}
		t.Threshold[i] = zeroThreshold(thr[i])
		if t.Threshold[i] != thr[i] {
			st.zeroBand++
		}
		switch d & lgbMissingMask {
		case lgbMissingNone:
			t.MissingLeft[i] = 0 <= thr[i]
			st.noneNaN++
		case lgbMissingZero:
			if t.ZeroMissing == nil {
				t.ZeroMissing = make([]bool, n)
			}
			t.ZeroMissing[i] = true
			t.MissingLeft[i] = d&lgbDefaultLeft != 0
			st.zeroMissing++
		case lgbMissingNaN:
			t.MissingLeft[i] = d&lgbDefaultLeft != 0
		}
	}
	if err := lgbCheckShape(&t, r.name, ti, S); err != nil {
		return forest.Tree{}, err
	}
	return t, nil
}

// lgbCheckShape checks that every node is reached exactly once from the
// root, without recursion, naming nodes as LightGBM numbers them.
func lgbCheckShape(t *forest.Tree, name string, ti, S int) error {
	seen := make([]bool, t.NumNodes())
	stack := []int{0}
	seen[0] = true
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		if t.IsLeaf(i) {
			continue
		}
		for _, c := range [2]int{t.Left[i], t.Right[i]} {
			if seen[c] {
				what := fmt.Sprintf("node %d", c)
				if c >= S {
					what = fmt.Sprintf("leaf %d", c-S)
				}
				return fmt.Errorf("%s: tree %d, node %d: %s is reached twice (a cycle or a shared child)", name, ti, i, what)
			}
			seen[c] = true
			stack = append(stack, c)
		}
	}
	for i, ok := range seen {
		if !ok {
			what := fmt.Sprintf("node %d", i)
			if i >= S {
				what = fmt.Sprintf("leaf %d", i-S)
			}
			return fmt.Errorf("%s: tree %d: %s is not reached from the root", name, ti, what)
		}
	}
	return nil
}

// lgbBitsets reads cat_boundaries and cat_threshold into the sorted
// category list of each of the ncat categorical splits: bit b of word w of
// a split's words is category 32w+b, which goes left.
func lgbBitsets(r *lgbReader, ncat int, budget *int) ([][]int32, error) {
	bounds, err := r.ints("cat_boundaries", ncat+1, 0, math.MaxInt32)
	if err != nil {
		return nil, err
	}
	var words []uint32
	if err := r.fields("cat_threshold", -1, func(_ int, s string) error {
		v, err := strconv.ParseUint(s, 10, 32)
		if err != nil {
			return fmt.Errorf("%q is not a 32-bit unsigned integer", s)
		}
		words = append(words, uint32(v))
		return nil
	}); err != nil {
		return nil, err
	}
	l := r.b.keys["cat_boundaries"]
	if bounds[0] != 0 || bounds[ncat] != len(words) {
		return nil, r.errf(l, "cat_boundaries", "must run from 0 to the %d words of cat_threshold", len(words))
	}
	if len(words) >= forest.MaxCategory/32 {
		return nil, r.errf(l, "cat_threshold", "%d words reach past category 2^31", len(words))
	}
	out := make([][]int32, ncat)
	for c := range ncat {
		lo, hi := bounds[c], bounds[c+1]
		if lo > hi {
			return nil, r.errf(l, "cat_boundaries", "value %d (%d) is below value %d (%d)", c+1, hi, c, lo)
		}
		list := make([]int32, 0, 4)
		for w := lo; w < hi; w++ {
			if *budget -= bits.OnesCount32(words[w]); *budget < 0 {
				return nil, r.errf(r.b.keys["cat_threshold"], "cat_threshold", "the bitsets list more categories than the file has bytes")
			}
			for x := words[w]; x != 0; x &= x - 1 {
				list = append(list, int32(32*(w-lo)+bits.TrailingZeros32(x)))
			}
		}
		out[c] = list
	}
	return out, nil
}
