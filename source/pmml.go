package source

// The PMML reader: TreeModel and MiningModel documents of PMML 4.4 (Data
// Mining Group, "PMML 4.4 - Tree Models", "- Multiple Models", "- Mining
// Schema", "- Targets", "- Predicates"), as sklearn2pmml writes them and as
// the specification allows them to be written by hand.
//
// How each rule is said in forest format 2 (measured against jpmml_evaluator
// 0.16.0 from the Python package index, scripts/pmml_fixtures.py,
// source/testdata/pmml):
//
//   - A TreeModel Node's children are a list of predicates: the first child
//     whose predicate is true is followed. Each list becomes a chain of
//     binary splits, one per comparison, in order. Predicates have three
//     values (true, false, unknown when a value they read is missing);
//     a compound predicate becomes a small decision graph over its parts
//     (and, or, xor, surrogate with the specification's truth tables), laid
//     out as a tree: a subtree reached by two paths is copied, and a tree
//     that grows past 64 binary nodes per Node plus 1,024 (or past the node
//     budget) is refused, naming the Node.
//   - Comparisons: x <= v is a split at v; x < v a split at the value just
//     below v; greater tests swap the children; equality is a set split when
//     v is an integer (category_match exact: PMML compares values, so 2.5 is
//     never 2), else two splits. A field of dataType float is compared as
//     the evaluator does: the input rounded to float32 against the value
//     parsed as a float32. When every field is float the model's
//     input_precision is float32; when double and float fields mix, a float
//     comparison becomes the double comparison that gives the same answer on
//     every input.
//   - missingValueStrategy: none (an unknown predicate counts as false),
//     lastPrediction (the current Node's score), defaultChild (the Node's
//     defaultChild), nullPrediction (see below); weightedConfidence and
//     aggregateNodes are refused. noTrueChildStrategy returnLastPrediction
//     gives the current Node's score.
//   - PMML can give no prediction (null): nullPrediction on a missing value,
//     returnNullPrediction when no child is true, a missing value with
//     missingValueTreatment returnInvalid. A forest always scores, so there
//     sawmill goes on as if the unknown predicate were false and, where no
//     child is true, gives the Node's own score or else follows its last
//     child. Rows PMML scores are scored exactly; the note says so. In a
//     Segmentation, a tree that can give no prediction is read only under
//     missingPredictionTreatment returnMissing (the whole model then gives
//     none); skipSegment and continue leave the tree out, which a forest
//     cannot do.
//   - MiningSchema missingValueReplacement replaces a missing input before
//     any predicate reads it: each split sends a missing value where the
//     replacement goes.
//   - Segmentation sum, average and majorityVote map to combine sum, average
//     and vote; weightedAverage and weightedMajorityVote are read when every
//     weight is 1 (they are then the unweighted methods). A modelChain is
//     read as boosted classifiers are written: one regression MiningModel
//     (a sum of trees with Targets rescaling) per class, then a
//     RegressionModel with softmax or logit normalization that takes each
//     sum with coefficient 1 and intercept 0.
//   - Targets rescaling z·f + c folds into the leaves exactly for one tree;
//     after a sum of trees it becomes base_score c/f with transform_scale f,
//     which rounds differently from z·f + c (within a few ulps: the note
//     says so).
//   - Classification leaves hold the ScoreDistribution's probabilities: the
//     probability attribute when given, else recordCount divided by the sum
//     of the Node's recordCounts.
//   - On the fixtures, trees, forests and votes score bit for bit as the
//     evaluator does; sklearn2pmml's gradient boosting (Targets after a sum,
//     logit and softmax) within 4 ulps of the largest output (the tests
//     allow 8).
//   - Refused, each with an error naming the element: string and integer
//     fields (a hint says to encode categories as numeric codes), set
//     members that are not integers in [0, 2^31) or that would need a float
//     field rounded in a double model, DataField Interval and non-valid
//     Value restrictions unless invalidValueTreatment is asIs, outliers
//     other than asIs, Target min, max and castInteger, missingValuePenalty,
//     weights other than 1, segment predicates other than True, derived
//     fields other than a rename or a cast to float, and every other model
//     element and multipleModelMethod.

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/forest"
)

var pmmlFormat = Format{
	Name:     "pmml",
	Describe: "PMML 4.4 TreeModel or MiningModel (XML, as sklearn2pmml writes it)",
	Detect:   detectPMML,
	Read:     readPMML,
}

// pmmlBlowUp bounds the nodes a tree may have after its predicate lists and
// compound predicates are laid out as binary splits, per Node of the source.
const pmmlBlowUp = 64

// pfield is a field a predicate can read: a DataField, or a DerivedField
// that only renames or retypes one.
type pfield struct {
	name     string
	dataType string // "float" or "double" (others are refused where read)
	feature  int    // index among the forest's features; -1 when not an input
	optype   string
	alias    *pfield  // the field a DerivedField refers to; nil for a DataField
	values   []string // the DataField's valid Values, in order
	limited  bool     // the DataField restricts its values (Interval, or Values marked invalid or missing)
}

// input is the DataField a field reads in the end.
func (f *pfield) input() *pfield {
	for f.alias != nil {
		f = f.alias
	}
	return f
}

// pmmlReader holds what the whole document shares.
type pmmlReader struct {
	name     string
	data     []byte
	fields   map[string]*pfield
	features []string
	f32      bool // every input field is float: input_precision float32
	budget   int  // node slots left over all trees
	nulls    bool // a construct where PMML gives no prediction was met
	cats     bool // a set split was made
	notes    []string
	seen     map[*xel]bool // LocalTransformations already read
}

func (r *pmmlReader) errf(e *xel, format string, args ...any) error {
	where := fmt.Sprintf("%s:%d: %s", r.name, lineOf(r.data, e.off), e.name)
	if id, ok := e.get("id"); ok && e.name == "Node" {
		where += fmt.Sprintf(" %q", clip([]byte(id)))
	}
	return fmt.Errorf("%s: %s", where, fmt.Sprintf(format, args...))
}

func readPMML(data []byte, name string, o Options) (*Result, error) {
	root, err := parsePMMLXML(data, name)
	if err != nil {
		return nil, err
	}
	r := &pmmlReader{name: name, data: data, fields: map[string]*pfield{}, seen: map[*xel]bool{}}
	r.budget = int(o.Read.MaxNodes)
	if r.budget <= 0 {
		r.budget = forest.DefaultMaxNodes
	}
	if v := root.attrOr("version", ""); !strings.HasPrefix(v, "4.") {
		return nil, r.errf(root, "version %q: sawmill reads PMML 4.x", clip([]byte(v)))
	}
	dd := root.child("DataDictionary")
	if dd == nil {
		return nil, r.errf(root, "no DataDictionary")
	}
	for _, df := range dd.children("DataField") {
		n, ok := df.get("name")
		if !ok {
			return nil, r.errf(df, "no name")
		}
		if _, dup := r.fields[n]; dup {
			return nil, r.errf(df, "field %q is defined twice", clip([]byte(n)))
		}
		f := &pfield{name: n, dataType: df.attrOr("dataType", ""), optype: df.attrOr("optype", ""), feature: -1}
		f.limited = df.child("Interval") != nil
		for _, v := range df.children("Value") {
			if p := v.attrOr("property", "valid"); p != "valid" {
				f.limited = true
				continue
			}
			f.values = append(f.values, v.attrOr("value", ""))
		}
		r.fields[n] = f
	}
	if td := root.child("TransformationDictionary"); td != nil {
		if err := r.derived(td); err != nil {
			return nil, err
		}
	}
	var model *xel
	for _, k := range root.kids {
		switch k.name {
		case "TreeModel", "MiningModel":
			if model != nil {
				return nil, r.errf(k, "a second model; sawmill reads a document with one")
			}
			model = k
		case "Header", "DataDictionary", "TransformationDictionary", "MiningBuildTask", "Extension", "":
		default:
			if strings.HasSuffix(k.name, "Model") || k.name == "Scorecard" || k.name == "RuleSetModel" {
				return nil, r.errf(k, "sawmill reads TreeModel and MiningModel, not %s", k.name)
			}
		}
	}
	if model == nil {
		return nil, r.errf(root, "no TreeModel or MiningModel")
	}
	return r.read(model, o)
}

// derived reads the DerivedFields of a TransformationDictionary or
// LocalTransformations: each may only rename a field (a FieldRef) as the
// same type, or as float (a cast of a double input to float32).
func (r *pmmlReader) derived(td *xel) error {
	for _, d := range td.children("DerivedField") {
		n, _ := d.get("name")
		var exprs []*xel
		for _, k := range d.kids {
			if k.name != "Extension" && k.name != "" {
				exprs = append(exprs, k)
			}
		}
		if len(exprs) != 1 || exprs[0].name != "FieldRef" {
			what := "no expression"
			if len(exprs) > 0 {
				what = exprs[0].name
			}
			return r.errf(d, "derived field %q is computed by %s; sawmill reads derived fields that only refer to another field (FieldRef)", clip([]byte(n)), what)
		}
		src, ok := r.fields[exprs[0].attrOr("field", "")]
		if !ok {
			return r.errf(exprs[0], "refers to field %q, which is not defined before it", clip([]byte(exprs[0].attrOr("field", ""))))
		}
		dt := d.attrOr("dataType", src.dataType)
		if dt != src.dataType && dt != "float" {
			return r.errf(d, "derived field %q turns %s field %q into %s; sawmill reads a rename, or a cast to float", clip([]byte(n)), src.dataType, clip([]byte(src.name)), dt)
		}
		if _, dup := r.fields[n]; dup {
			return r.errf(d, "field %q is defined twice", clip([]byte(n)))
		}
		r.fields[n] = &pfield{name: n, dataType: dt, optype: src.optype, feature: -1, alias: src}
	}
	return nil
}

// leafMode says what a TreeModel's leaves hold in the forest.
type leafMode int

const (
	leafScore leafMode = iota // the score, a number (regression)
	leafProb                  // the class probabilities (classification)
	leafVote                  // a one-hot vector of the predicted class (majority votes)
)

// pschema is what a model's MiningSchema says about its fields.
type pschema struct {
	replace map[*pfield]float64 // missingValueReplacement, by input field
}

// schema reads a model's MiningSchema (and LocalTransformations) on top of
// what the enclosing models' schemas said.
func (r *pmmlReader) schema(model *xel, outer pschema) (pschema, *xel, error) {
	s := pschema{replace: map[*pfield]float64{}}
	for k, v := range outer.replace {
		s.replace[k] = v
	}
	if lt := model.child("LocalTransformations"); lt != nil && !r.seen[lt] {
		r.seen[lt] = true
		if err := r.derived(lt); err != nil {
			return s, nil, err
		}
	}
	ms := model.child("MiningSchema")
	if ms == nil {
		return s, nil, r.errf(model, "no MiningSchema")
	}
	var target *xel
	for _, mf := range ms.children("MiningField") {
		n := mf.attrOr("name", "")
		f, ok := r.fields[n]
		if !ok {
			return s, nil, r.errf(mf, "field %q is not in the DataDictionary", clip([]byte(n)))
		}
		switch u := mf.attrOr("usageType", "active"); u {
		case "target", "predicted":
			target = mf
			continue
		case "active":
		case "supplementary", "group", "order", "frequencyWeight", "analysisWeight":
			continue
		default:
			return s, nil, r.errf(mf, "usageType %q is not one sawmill knows", clip([]byte(u)))
		}
		if v := mf.attrOr("outliers", "asIs"); v != "asIs" {
			return s, nil, r.errf(mf, "field %q: outliers %q is not supported\nhint: sawmill reads outliers=\"asIs\"", clip([]byte(n)), clip([]byte(v)))
		}
		switch v := mf.attrOr("missingValueTreatment", "asIs"); v {
		case "asIs", "asMean", "asMode", "asMedian", "asValue":
			// The treatment names how the replacement was chosen; the
			// replacement itself is what is applied (PMML 4.4, MiningSchema).
		case "returnInvalid":
			r.nulls = true
		default:
			return s, nil, r.errf(mf, "field %q: missingValueTreatment %q is not one PMML 4.4 defines", clip([]byte(n)), clip([]byte(v)))
		}
		if rv, ok := mf.get("missingValueReplacement"); ok {
			x, err := r.value(mf, f, rv)
			if err != nil {
				return s, nil, err
			}
			s.replace[f.input()] = x
		}
		switch v := mf.attrOr("invalidValueTreatment", "returnInvalid"); v {
		case "asIs", "returnInvalid", "asMissing":
			// A continuous field without Interval or Value restrictions has
			// no invalid values (checked in input), so all three agree.
		default:
			return s, nil, r.errf(mf, "field %q: invalidValueTreatment %q is not supported\nhint: sawmill reads asIs, asMissing and returnInvalid", clip([]byte(n)), clip([]byte(v)))
		}
	}
	return s, target, nil
}

// value parses a number written for field f as the evaluator reads it: a
// float field's values as float32, others as float64.
func (r *pmmlReader) value(e *xel, f *pfield, s string) (float64, error) {
	s = strings.TrimSpace(s)
	bits := 64
	if f.dataType == "float" {
		bits = 32
	}
	v, err := strconv.ParseFloat(s, bits)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, r.errf(e, "%q is not a finite number for %s field %q", clip([]byte(s)), f.dataType, clip([]byte(f.name)))
	}
	return v, nil
}

// number parses a finite double attribute of e.
func (r *pmmlReader) number(e *xel, key string, def float64) (float64, error) {
	s, ok := e.get(key)
	if !ok {
		return def, nil
	}
	v, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, r.errf(e, "%s %q is not a finite number", key, clip([]byte(s)))
	}
	return v, nil
}

// field returns the field a predicate names, checked to be numeric and an
// input of the model.
func (r *pmmlReader) field(e *xel) (*pfield, error) {
	n := e.attrOr("field", "")
	f, ok := r.fields[n]
	if !ok {
		return nil, r.errf(e, "field %q is not defined", clip([]byte(n)))
	}
	if f.input().feature < 0 {
		return nil, r.errf(e, "field %q is not an active field of the model's MiningSchema", clip([]byte(n)))
	}
	return f, r.numeric(e, f)
}

// numeric checks that field f, read at e, holds numbers sawmill compares:
// dataType float or double.
func (r *pmmlReader) numeric(e *xel, f *pfield) error {
	switch f.dataType {
	case "float", "double":
		return nil
	case "string":
		return r.errf(e, "field %q holds strings; sawmill scores numeric inputs\nhint: encode the categories as numeric codes before exporting the model", clip([]byte(f.name)))
	}
	return r.errf(e, "field %q is of dataType %q; sawmill reads float and double fields", clip([]byte(f.name)), clip([]byte(f.dataType)))
}

// cont is a place a test can lead to: mk lays out a fresh copy of its
// subtree and returns the copy's root. Two conts with the same id lay out
// the same subtree, so a split can send its missing values along with one
// of its branches instead of testing for them first.
type cont struct {
	id int
	mk func() int
}

// pmmlAbort carries an error out of the recursive layout of a tree.
type pmmlAbort struct{ err error }

// tbuild lays out one TreeModel as a forest.Tree.
type tbuild struct {
	r        *pmmlReader
	t        forest.Tree
	width    int
	mode     leafMode
	classes  map[string]int
	fold     func(float64) float64 // applied to every regression score
	schema   pschema
	strategy string // missingValueStrategy
	noTrue   string // noTrueChildStrategy
	max      int    // node slots this tree may take
	ids      int
	nodeIDs  map[*xel]int
	lastIDs  map[*xel]int
	cur      *xel // the Node being laid out, for messages
}

func (b *tbuild) fail(err error) { panic(pmmlAbort{err}) }

func (b *tbuild) id() int { b.ids++; return b.ids }

// add appends a node slot and returns its id.
func (b *tbuild) add() int {
	i := len(b.t.Left)
	if i >= b.max {
		b.fail(b.r.errf(b.cur, "the tree grows past %d binary nodes when its predicates are laid out as splits\nhint: compound predicates are copied into every branch that reaches them; simplify the tree", b.max))
	}
	b.t.Feature = append(b.t.Feature, -1)
	b.t.Threshold = append(b.t.Threshold, 0)
	b.t.Left = append(b.t.Left, -1)
	b.t.Right = append(b.t.Right, -1)
	b.t.MissingLeft = append(b.t.MissingLeft, false)
	b.t.Categories = append(b.t.Categories, nil)
	for range b.width {
		b.t.Value = append(b.t.Value, 0)
	}
	return i
}

// split lays out a split node and then its two subtrees.
func (b *tbuild) split(feat int, thr float64, cats []int32, missLeft bool, l, r cont) int {
	i := b.add()
	b.t.Feature[i], b.t.Threshold[i], b.t.MissingLeft[i] = feat, thr, missLeft
	if cats != nil {
		b.t.Categories[i] = cats
		b.r.cats = true
	}
	li := l.mk()
	ri := r.mk()
	b.t.Left[i], b.t.Right[i] = li, ri
	return i
}

// missing lays out a test that sends a missing value of feat to yes and
// every other value to no: a set split that lists no category.
func (b *tbuild) missing(feat int, yes, no cont) int {
	return b.split(feat, 0, []int32{}, true, yes, no)
}

// leaf lays out a leaf holding vector v.
func (b *tbuild) leaf(v []float64) int {
	i := b.add()
	copy(b.t.Value[i*b.width:], v)
	return i
}

// prediction returns Node n's prediction as a leaf vector, or false when n
// has none (no score and no ScoreDistribution).
func (b *tbuild) prediction(n *xel) ([]float64, bool) {
	score, hasScore := n.get("score")
	switch b.mode {
	case leafScore:
		if !hasScore {
			return nil, false
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(score), 64)
		if err != nil || math.IsInf(v, 0) || math.IsNaN(v) {
			b.fail(b.r.errf(n, "score %q is not a finite number", clip([]byte(score))))
		}
		return []float64{b.fold(v)}, true
	case leafVote:
		if !hasScore {
			return nil, false
		}
		return b.oneHot(n, score), true
	}
	sds := n.children("ScoreDistribution")
	if len(sds) == 0 {
		if !hasScore {
			return nil, false
		}
		// A Node with a score and no distribution predicts its score with
		// probability 1.
		return b.oneHot(n, score), true
	}
	counts := make([]float64, b.width)
	probs := make([]float64, b.width)
	seen := make([]bool, b.width)
	hasProb, total := 0, 0.0
	for _, sd := range sds {
		k, ok := b.classes[sd.attrOr("value", "")]
		if !ok {
			b.fail(b.r.errf(sd, "value %q is not one of the target's classes", clip([]byte(sd.attrOr("value", "")))))
		}
		if seen[k] {
			b.fail(b.r.errf(sd, "class %q is given twice", clip([]byte(sd.attrOr("value", "")))))
		}
		seen[k] = true
		c, err := b.r.number(sd, "recordCount", math.NaN())
		if err != nil {
			b.fail(err)
		}
		if _, ok := sd.get("probability"); ok {
			p, err := b.r.number(sd, "probability", 0)
			if err != nil {
				b.fail(err)
			}
			if p < 0 || p > 1 {
				b.fail(b.r.errf(sd, "probability %v is not in [0, 1]", p))
			}
			probs[k] = p
			hasProb++
		} else if math.IsNaN(c) || c < 0 {
			b.fail(b.r.errf(sd, "no probability, and recordCount is missing or negative"))
		}
		counts[k] = c
		if !math.IsNaN(c) {
			total += c
		}
	}
	switch hasProb {
	case len(sds):
		return probs, true
	case 0:
	default:
		b.fail(b.r.errf(n, "some ScoreDistributions give a probability and some do not"))
	}
	if !(total > 0) {
		b.fail(b.r.errf(n, "the recordCounts of its ScoreDistributions sum to %v", total))
	}
	for k := range counts {
		counts[k] /= total
	}
	return counts, true
}

// oneHot is the vector of Node n's class score: 1 for it, 0 for the rest.
func (b *tbuild) oneHot(n *xel, score string) []float64 {
	k, ok := b.classes[strings.TrimSpace(score)]
	if !ok {
		b.fail(b.r.errf(n, "score %q is not one of the target's classes", clip([]byte(score))))
	}
	v := make([]float64, b.width)
	v[k] = 1
	return v
}

// nodes lists n's child Nodes.
func nodes(n *xel) []*xel { return n.children("Node") }

// at returns the cont that lays out the evaluation from Node n on (n's own
// predicate already true).
func (b *tbuild) at(n *xel) cont {
	id, ok := b.nodeIDs[n]
	if !ok {
		id = b.id()
		b.nodeIDs[n] = id
	}
	return cont{id: id, mk: func() int { return b.node(n) }}
}

// last returns the cont for "the prediction of Node n": its score, or,
// where it has none (PMML's null prediction), its last child. null says
// that PMML gives no prediction there in any case; it is noted when the
// leaf is laid out, so a place no row reaches notes nothing.
func (b *tbuild) last(n *xel, null bool) cont {
	id, ok := b.lastIDs[n]
	if !ok {
		id = b.id()
		b.lastIDs[n] = id
	}
	return cont{id: id, mk: func() int {
		v, ok := b.prediction(n)
		if ok {
			b.r.nulls = b.r.nulls || null
			return b.leaf(v)
		}
		b.r.nulls = true
		kids := nodes(n)
		if len(kids) == 0 {
			b.fail(b.r.errf(n, "a leaf Node without a score"))
		}
		return b.at(kids[len(kids)-1]).mk()
	}}
}

// node lays out the evaluation from Node n on: its children's predicates
// in order, the first true one winning.
func (b *tbuild) node(n *xel) int {
	kids := nodes(n)
	if len(kids) == 0 {
		v, ok := b.prediction(n)
		if !ok {
			b.fail(b.r.errf(n, "a leaf Node without a score"))
		}
		return b.leaf(v)
	}
	var unknown *cont
	switch b.strategy {
	case "none":
	case "nullPrediction":
		// As none; known notes it where a comparison can be unknown.
	case "lastPrediction":
		c := b.last(n, false)
		unknown = &c
	case "defaultChild":
		d, ok := n.get("defaultChild")
		if !ok {
			b.fail(b.r.errf(n, "missingValueStrategy defaultChild, but the Node has no defaultChild"))
		}
		for _, k := range kids {
			if id, _ := k.get("id"); id == d {
				c := b.at(k)
				unknown = &c
				break
			}
		}
		if unknown == nil {
			b.fail(b.r.errf(n, "defaultChild %q is not the id of one of its Nodes", clip([]byte(d))))
		}
	}
	var chain func(i int) cont
	chain = func(i int) cont {
		if i == len(kids) {
			return b.last(n, b.noTrue == "returnNullPrediction")
		}
		k := kids[i]
		return cont{id: b.id(), mk: func() int {
			b.cur = k
			f := chain(i + 1)
			u := f
			if unknown != nil {
				u = *unknown
			}
			return b.test(predicate(k), b.at(k), f, u)
		}}
	}
	return chain(0).mk()
}

// predicate returns the predicate element of a Node or Segment.
func predicate(n *xel) *xel {
	for _, k := range n.kids {
		switch k.name {
		case "SimplePredicate", "CompoundPredicate", "SimpleSetPredicate", "True", "False":
			return k
		}
	}
	return nil
}

// test lays out predicate p: to t where it is true, f where false, u where
// unknown (a value it reads is missing).
func (b *tbuild) test(p *xel, t, f, u cont) int {
	if p == nil {
		b.fail(b.r.errf(b.cur, "no predicate"))
	}
	switch p.name {
	case "True":
		return t.mk()
	case "False":
		return f.mk()
	case "SimplePredicate":
		return b.simple(p, t, f, u)
	case "SimpleSetPredicate":
		return b.set(p, t, f, u)
	}
	if p.name != "CompoundPredicate" {
		b.fail(b.r.errf(p, "not a predicate (PMML 4.4 has SimplePredicate, CompoundPredicate, SimpleSetPredicate, True and False)"))
	}
	// CompoundPredicate (PMML 4.4, Predicates: the truth tables of and, or,
	// xor and surrogate over true, false and unknown).
	var parts []*xel
	for _, k := range p.kids {
		if k.name != "Extension" && k.name != "" {
			parts = append(parts, k)
		}
	}
	if len(parts) < 2 {
		b.fail(b.r.errf(p, "a CompoundPredicate needs at least two predicates, it has %d", len(parts)))
	}
	op := p.attrOr("booleanOperator", "")
	var lay func(i int, t, f, u cont) int
	rest := func(i int, t, f, u cont) cont {
		return cont{id: b.id(), mk: func() int { return lay(i, t, f, u) }}
	}
	switch op {
	case "and":
		// false if any part is false; else unknown if any is unknown.
		lay = func(i int, t, f, u cont) int {
			if i == len(parts)-1 {
				return b.test(parts[i], t, f, u)
			}
			return b.test(parts[i], rest(i+1, t, f, u), f, rest(i+1, u, f, u))
		}
	case "or":
		// true if any part is true; else unknown if any is unknown.
		lay = func(i int, t, f, u cont) int {
			if i == len(parts)-1 {
				return b.test(parts[i], t, f, u)
			}
			return b.test(parts[i], t, rest(i+1, t, f, u), rest(i+1, t, u, u))
		}
	case "xor":
		// unknown if any part is unknown; else true for an odd number of
		// true parts.
		lay = func(i int, t, f, u cont) int {
			if i == len(parts)-1 {
				return b.test(parts[i], t, f, u)
			}
			return b.test(parts[i], rest(i+1, f, t, u), rest(i+1, t, f, u), u)
		}
	case "surrogate":
		// the first part that is not unknown decides; unknown if all are.
		lay = func(i int, t, f, u cont) int {
			if i == len(parts)-1 {
				return b.test(parts[i], t, f, u)
			}
			return b.test(parts[i], t, f, rest(i+1, t, f, u))
		}
	default:
		b.fail(b.r.errf(p, "booleanOperator %q is not and, or, xor or surrogate", clip([]byte(op))))
	}
	return lay(0, t, f, u)
}

// below returns the threshold for x < v on field fl: the largest value of
// the field's precision below v, as the double threshold that gives the
// same answer.
func (b *tbuild) below(e *xel, fl *pfield, v float64) float64 {
	if fl.dataType == "float" {
		w := math.Nextafter32(float32(v), float32(math.Inf(-1)))
		if math.IsInf(float64(w), 0) {
			b.fail(b.r.errf(e, "x < %v on a float field: nothing below it is a finite float32", v))
		}
		return b.at32(w)
	}
	w := math.Nextafter(v, math.Inf(-1))
	if math.IsInf(w, 0) {
		b.fail(b.r.errf(e, "x < %v: nothing below it is a finite double", v))
	}
	return w
}

// atOrBelow returns the threshold for x <= v on field fl.
func (b *tbuild) atOrBelow(fl *pfield, v float64) float64 {
	if fl.dataType == "float" {
		return b.at32(float32(v))
	}
	return v
}

// at32 is the threshold t with x <= t exactly when round32(x) <= w: w
// itself in a float32 model (the interpreter rounds the input), else the
// largest double that rounds to a float32 at or below w.
func (b *tbuild) at32(w float32) float64 {
	if b.r.f32 {
		return float64(w)
	}
	return upper64(w)
}

// upper64 is the largest double x with float32(x) <= w, for finite w: the
// midpoint between w and the next float32 up when rounding to nearest, ties
// to even, sends that midpoint down to w, else the double just below it.
func upper64(w float32) float64 {
	var mid float64
	if w == math.MaxFloat32 {
		mid = math.MaxFloat32 + math.Ldexp(1, 127-24) // half an ulp above the largest float32
	} else {
		up := math.Nextafter32(w, float32(math.Inf(1)))
		mid = (float64(w) + float64(up)) / 2 // exact: one more bit than float32 has
	}
	if float32(mid) <= w {
		return mid
	}
	return math.Nextafter(mid, math.Inf(-1))
}

// known returns where a missing value goes at a comparison on field fl:
// where its replacement goes when the schema replaces it (rep reports that
// placement), else to u.
func (b *tbuild) known(fl *pfield, u cont, rep func(x float64) cont) cont {
	if x, ok := b.schema.replace[fl.input()]; ok {
		if fl.dataType == "float" {
			x = forest.Round32(x)
		}
		return rep(x)
	}
	if b.strategy == "nullPrediction" {
		b.r.nulls = true // a missing value gives no prediction in PMML
	}
	return u
}

// cmp lays out "x <= thr" with the values that pass going to l and the
// rest to r, and missing values to u.
func (b *tbuild) cmp(feat int, thr float64, l, r, u cont) int {
	switch u.id {
	case l.id:
		return b.split(feat, thr, nil, true, l, r)
	case r.id:
		return b.split(feat, thr, nil, false, l, r)
	}
	return b.missing(feat, u, cont{id: b.id(), mk: func() int { return b.split(feat, thr, nil, false, l, r) }})
}

// category returns v as a set split's category when the field's values
// meet it exactly (under category_match exact), or false.
func (b *tbuild) category(fl *pfield, v float64) (int32, bool) {
	// A set split compares the input as the model rounds it: a float field
	// in a double model would need the input rounded first.
	if (fl.dataType == "float") != b.r.f32 {
		return 0, false
	}
	if v >= 0 && v < forest.MaxCategory && v == math.Trunc(v) {
		return int32(v), true
	}
	return 0, false
}

// simple lays out a SimplePredicate (PMML 4.4, Predicates).
func (b *tbuild) simple(p *xel, t, f, u cont) int {
	fl, err := b.r.field(p)
	if err != nil {
		b.fail(err)
	}
	feat := fl.input().feature
	op := p.attrOr("operator", "")
	switch op {
	case "isMissing":
		if _, ok := b.schema.replace[fl.input()]; ok {
			return f.mk()
		}
		return b.missing(feat, t, f)
	case "isNotMissing":
		if _, ok := b.schema.replace[fl.input()]; ok {
			return t.mk()
		}
		return b.missing(feat, f, t)
	}
	s, ok := p.get("value")
	if !ok {
		b.fail(b.r.errf(p, "operator %q needs a value", clip([]byte(op))))
	}
	v, err := b.r.value(p, fl, s)
	if err != nil {
		b.fail(err)
	}
	pick := func(yes bool) cont {
		if yes {
			return t
		}
		return f
	}
	switch op {
	case "lessOrEqual":
		return b.cmp(feat, b.atOrBelow(fl, v), t, f, b.known(fl, u, func(x float64) cont { return pick(x <= v) }))
	case "lessThan":
		return b.cmp(feat, b.below(p, fl, v), t, f, b.known(fl, u, func(x float64) cont { return pick(x < v) }))
	case "greaterThan":
		return b.cmp(feat, b.atOrBelow(fl, v), f, t, b.known(fl, u, func(x float64) cont { return pick(x > v) }))
	case "greaterOrEqual":
		return b.cmp(feat, b.below(p, fl, v), f, t, b.known(fl, u, func(x float64) cont { return pick(x >= v) }))
	case "equal", "notEqual":
		if op == "notEqual" {
			t, f = f, t
		}
		uu := b.known(fl, u, func(x float64) cont { return pick(x == v) })
		if c, ok := b.category(fl, v); ok {
			missLeft := uu.id == t.id
			if uu.id != t.id && uu.id != f.id {
				return b.missing(feat, uu, cont{id: b.id(), mk: func() int { return b.split(feat, 0, []int32{c}, false, t, f) }})
			}
			return b.split(feat, 0, []int32{c}, missLeft, t, f)
		}
		// v < x <= v: at or below v, and not below it.
		lo := b.below(p, fl, v)
		inner := cont{id: b.id(), mk: func() int { return b.split(feat, lo, nil, false, f, t) }}
		return b.cmp(feat, b.atOrBelow(fl, v), inner, f, uu)
	}
	b.fail(b.r.errf(p, "operator %q is not one PMML 4.4 defines for SimplePredicate", clip([]byte(op))))
	return 0
}

// set lays out a SimpleSetPredicate on numeric codes.
func (b *tbuild) set(p *xel, t, f, u cont) int {
	fl, err := b.r.field(p)
	if err != nil {
		b.fail(err)
	}
	feat := fl.input().feature
	switch op := p.attrOr("booleanOperator", ""); op {
	case "isIn":
	case "isNotIn":
		t, f = f, t
	default:
		b.fail(b.r.errf(p, "booleanOperator %q is not isIn or isNotIn", clip([]byte(op))))
	}
	arr := p.child("Array")
	if arr == nil {
		b.fail(b.r.errf(p, "no Array"))
	}
	if ty := arr.attrOr("type", ""); ty != "int" && ty != "real" {
		b.fail(b.r.errf(arr, "an Array of type %q; sawmill reads sets of numeric codes (int or real)\nhint: encode the categories as numeric codes before exporting the model", clip([]byte(ty))))
	}
	var cats []int32
	for _, w := range strings.Fields(string(arr.text)) {
		v, err := b.r.value(arr, fl, strings.Trim(w, `"`))
		if err != nil {
			b.fail(err)
		}
		c, ok := b.category(fl, v)
		if !ok {
			b.fail(b.r.errf(arr, "%q is not a category sawmill can test here: set members must be integers in [0, 2^31) on a field of the model's input precision", clip([]byte(w))))
		}
		cats = append(cats, c)
	}
	if n, ok := arr.get("n"); ok && n != strconv.Itoa(len(cats)) {
		b.fail(b.r.errf(arr, "n is %s, but it lists %d values", clip([]byte(n)), len(cats)))
	}
	slices.Sort(cats)
	cats = slices.Compact(cats)
	uu := b.known(fl, u, func(x float64) cont {
		c, ok := b.category(fl, x)
		if ok {
			if _, in := slices.BinarySearch(cats, c); in {
				return t
			}
		}
		return f
	})
	switch uu.id {
	case t.id:
		return b.split(feat, 0, cats, true, t, f)
	case f.id:
		return b.split(feat, 0, cats, false, t, f)
	}
	return b.missing(feat, uu, cont{id: b.id(), mk: func() int { return b.split(feat, 0, cats, false, t, f) }})
}

// tree lays out one TreeModel.
func (r *pmmlReader) tree(tm *xel, mode leafMode, classes []string, outer pschema, fold func(float64) float64) (forest.Tree, error) {
	s, _, err := r.schema(tm, outer)
	if err != nil {
		return forest.Tree{}, err
	}
	b := &tbuild{r: r, mode: mode, schema: s, fold: fold, cur: tm,
		nodeIDs: map[*xel]int{}, lastIDs: map[*xel]int{}, classes: map[string]int{}}
	b.width = 1
	if mode != leafScore {
		b.width = len(classes)
		for k, c := range classes {
			b.classes[c] = k
		}
	}
	b.strategy = tm.attrOr("missingValueStrategy", "none")
	switch b.strategy {
	case "none", "lastPrediction", "nullPrediction", "defaultChild":
	case "weightedConfidence", "aggregateNodes":
		return forest.Tree{}, r.errf(tm, "missingValueStrategy %q is not supported: it blends the predictions of several Nodes, which a forest's leaves cannot say\nhint: sawmill reads none, lastPrediction, nullPrediction and defaultChild", b.strategy)
	default:
		return forest.Tree{}, r.errf(tm, "missingValueStrategy %q is not one PMML 4.4 defines", clip([]byte(b.strategy)))
	}
	b.noTrue = tm.attrOr("noTrueChildStrategy", "returnNullPrediction")
	if b.noTrue != "returnNullPrediction" && b.noTrue != "returnLastPrediction" {
		return forest.Tree{}, r.errf(tm, "noTrueChildStrategy %q is not one PMML 4.4 defines", clip([]byte(b.noTrue)))
	}
	if p, err := r.number(tm, "missingValuePenalty", 1); err != nil {
		return forest.Tree{}, err
	} else if p != 1 {
		return forest.Tree{}, r.errf(tm, "missingValuePenalty %v is not supported (it scales confidences, which sawmill does not compute)", p)
	}
	if tg := tm.child("Targets"); tg != nil {
		if err := r.identityTargets(tg); err != nil {
			return forest.Tree{}, err
		}
	}
	root := tm.child("Node")
	if root == nil {
		return forest.Tree{}, r.errf(tm, "no Node")
	}
	if p := predicate(root); p == nil || p.name != "True" {
		return forest.Tree{}, r.errf(root, "the root Node's predicate is not True; sawmill reads trees whose root holds every row")
	}
	count := 0
	walk := []*xel{root}
	for len(walk) > 0 {
		n := walk[len(walk)-1]
		walk = walk[:len(walk)-1]
		count++
		walk = append(walk, nodes(n)...)
	}
	b.max = min(pmmlBlowUp*count+1024, r.budget)
	err = func() (err error) {
		defer func() {
			if p := recover(); p != nil {
				a, ok := p.(pmmlAbort)
				if !ok {
					panic(p)
				}
				err = a.err
			}
		}()
		b.cur = root
		b.node(root)
		return nil
	}()
	if err != nil {
		return forest.Tree{}, err
	}
	r.budget -= len(b.t.Left)
	if !slices.ContainsFunc(b.t.Categories, func(c []int32) bool { return c != nil }) {
		b.t.Categories = nil
	}
	return b.t, nil
}

// targets reads a Targets element: the rescaling z·factor + constant.
func (r *pmmlReader) targets(tg *xel) (factor, constant float64, err error) {
	ts := tg.children("Target")
	if len(ts) != 1 {
		return 0, 0, r.errf(tg, "%d Target elements; sawmill reads one", len(ts))
	}
	t := ts[0]
	for _, a := range []string{"min", "max", "castInteger"} {
		if _, ok := t.get(a); ok {
			return 0, 0, r.errf(t, "%s is not supported\nhint: sawmill reads rescaleFactor and rescaleConstant", a)
		}
	}
	if t.child("TargetValue") != nil {
		return 0, 0, r.errf(t, "TargetValue is not supported")
	}
	if factor, err = r.number(t, "rescaleFactor", 1); err != nil {
		return
	}
	if factor == 0 {
		return 0, 0, r.errf(t, "rescaleFactor is 0")
	}
	constant, err = r.number(t, "rescaleConstant", 0)
	return
}

// identityTargets accepts Targets that change nothing.
func (r *pmmlReader) identityTargets(tg *xel) error {
	f, c, err := r.targets(tg)
	if err != nil {
		return err
	}
	if f != 1 || c != 0 {
		return r.errf(tg, "rescaling here is not supported; sawmill reads Targets on the outermost model and on the sums of a modelChain")
	}
	return nil
}

// classesOf returns the target's classes: the Values of its DataField, in
// order (the order of the evaluator's probability outputs).
func (r *pmmlReader) classesOf(model, target *xel) ([]string, error) {
	if target == nil {
		return nil, r.errf(model, "a classification model without a target field in its MiningSchema")
	}
	f := r.fields[target.attrOr("name", "")].input()
	if len(f.values) < 2 {
		return nil, r.errf(target, "the target field %q lists %d classes (Value elements in its DataField); a classifier needs at least 2", clip([]byte(f.name)), len(f.values))
	}
	return f.values, nil
}

// read converts the document's model.
func (r *pmmlReader) read(model *xel, o Options) (*Result, error) {
	// The inputs: the active fields of the outermost MiningSchema, in order.
	ms := model.child("MiningSchema")
	if ms == nil {
		return nil, r.errf(model, "no MiningSchema")
	}
	allFloat := true
	for _, mf := range ms.children("MiningField") {
		if u := mf.attrOr("usageType", "active"); u != "active" {
			continue
		}
		n := mf.attrOr("name", "")
		f, ok := r.fields[n]
		if !ok {
			return nil, r.errf(mf, "field %q is not in the DataDictionary", clip([]byte(n)))
		}
		if f.alias != nil {
			return nil, r.errf(mf, "field %q is a derived field; the outermost MiningSchema names inputs", clip([]byte(n)))
		}
		if f.feature >= 0 {
			return nil, r.errf(mf, "field %q is listed twice", clip([]byte(n)))
		}
		if err := r.numeric(mf, f); err != nil {
			return nil, err
		}
		if f.limited && mf.attrOr("invalidValueTreatment", "returnInvalid") != "asIs" {
			return nil, r.errf(mf, "field %q restricts its values (Interval or Value elements in its DataField), and sawmill does not test them\nhint: invalidValueTreatment=\"asIs\" scores every value; remove the restriction or set that", clip([]byte(n)))
		}
		allFloat = allFloat && f.dataType == "float"
		f.feature = len(r.features)
		r.features = append(r.features, n)
	}
	if len(r.features) == 0 {
		return nil, r.errf(ms, "no active fields")
	}
	r.f32 = allFloat
	s, target, err := r.schema(model, pschema{})
	if err != nil {
		return nil, err
	}
	fo := &forest.Forest{Features: slices.Clone(r.features), InputPrecision: forest.Float64, Transform: forest.NoTransform}
	if r.f32 {
		fo.InputPrecision = forest.Float32
	}
	exact := true
	switch fn := model.attrOr("functionName", ""); fn {
	case "classification":
		fo.Task = forest.Classification
		if fo.Classes, err = r.classesOf(model, target); err != nil {
			return nil, err
		}
	case "regression":
		fo.Task = forest.Regression
	default:
		return nil, r.errf(model, "functionName %q; sawmill reads classification and regression models", clip([]byte(fn)))
	}
	if model.name == "TreeModel" {
		mode, fold := leafProb, func(x float64) float64 { return x }
		if fo.Task == forest.Regression {
			mode = leafScore
			if tg := model.child("Targets"); tg != nil {
				f, c, err := r.targets(tg)
				if err != nil {
					return nil, err
				}
				// One tree: score·factor + constant is what the evaluator
				// computes, two roundings, done here once per leaf.
				fold = func(x float64) float64 { return x*f + c }
			}
		}
		t, err := r.tree(withoutTargets(model), mode, fo.Classes, pschema{}, fold)
		if err != nil {
			return nil, err
		}
		fo.Combine = forest.Average
		fo.Trees = []forest.Tree{t}
	} else if exact, err = r.mining(model, fo, s); err != nil {
		return nil, err
	}
	if r.cats {
		fo.CategoryMatch = forest.MatchExact
	}
	if fo.BaseScore == nil {
		fo.BaseScore = make([]float64, fo.NumOutputs())
	}
	notes := r.notes
	if r.nulls {
		notes = append(notes, "where PMML gives no prediction (a missing value under nullPrediction or returnInvalid, or no true child under returnNullPrediction), sawmill scores the row anyway: it treats the unknown comparison as false and takes the Node's score or else its last child; every row PMML scores is scored the same")
	}
	if !exact {
		notes = append(notes, "the Targets rescaling after a sum of trees (z·factor + constant) is computed as (constant/factor + z)·factor, which may differ from the evaluator's in the last bits")
	}
	more, err := o.rename(fo, r.name)
	if err != nil {
		return nil, err
	}
	if o.Missing != nil {
		fo.HasMissingValue, fo.MissingValue = true, *o.Missing
	}
	if err := fo.Validate(r.name); err != nil {
		return nil, err
	}
	return &Result{Forest: fo, Notes: append(notes, more...)}, nil
}

// withoutTargets is a model element without its Targets (already applied
// by the caller).
func withoutTargets(m *xel) *xel {
	c := *m
	c.kids = slices.DeleteFunc(slices.Clone(m.kids), func(k *xel) bool { return k.name == "Targets" })
	return &c
}

// segments returns a Segmentation's models, checking that each Segment
// holds every row (predicate True) and has weight 1 where weights are read.
func (r *pmmlReader) segments(seg *xel, weighted bool) ([]*xel, error) {
	var out []*xel
	for _, sg := range seg.children("Segment") {
		if p := predicate(sg); p == nil || p.name != "True" {
			return nil, r.errf(sg, "the Segment's predicate is not True; sawmill reads segmentations whose every segment scores every row")
		}
		if w, err := r.number(sg, "weight", 1); err != nil {
			return nil, err
		} else if w != 1 && weighted {
			return nil, r.errf(sg, "weight %v: sawmill reads weighted segmentations whose weights are all 1", w)
		}
		var m *xel
		for _, k := range sg.kids {
			if strings.HasSuffix(k.name, "Model") {
				m = k
			}
		}
		if m == nil {
			return nil, r.errf(sg, "no model")
		}
		out = append(out, m)
	}
	if len(out) == 0 {
		return nil, r.errf(seg, "no Segment")
	}
	return out, nil
}

// segmentTree lays out the TreeModel of a Segment of seg. A tree that can
// give no prediction is read only where the segmentation then gives none
// either (missingPredictionTreatment returnMissing): with skipSegment or
// continue the evaluator leaves that tree out of the sum or vote, which a
// forest cannot do.
func (r *pmmlReader) segmentTree(seg, tm *xel, mode leafMode, classes []string, s pschema) (forest.Tree, error) {
	before := r.nulls
	r.nulls = false
	t, err := r.tree(tm, mode, classes, s, func(x float64) float64 { return x })
	if err != nil {
		return t, err
	}
	if mpt := seg.attrOr("missingPredictionTreatment", "continue"); r.nulls && mpt != "returnMissing" {
		return t, r.errf(tm, "the tree can give no prediction (a missing value under nullPrediction, or no true child under returnNullPrediction), and the Segmentation's missingPredictionTreatment %q then leaves it out of the %s, which a forest cannot do\nhint: missingPredictionTreatment=\"returnMissing\", or missingValueStrategy lastPrediction or defaultChild in the tree", clip([]byte(mpt)), seg.attrOr("multipleModelMethod", ""))
	}
	r.nulls = r.nulls || before
	return t, nil
}

// mining converts a MiningModel into fo (whose Task and Classes are set)
// and reports whether the conversion is exact.
func (r *pmmlReader) mining(mm *xel, fo *forest.Forest, s pschema) (bool, error) {
	seg := mm.child("Segmentation")
	if seg == nil {
		return false, r.errf(mm, "no Segmentation")
	}
	method := seg.attrOr("multipleModelMethod", "")
	if method == "modelChain" {
		return r.chain(mm, seg, fo, s)
	}
	weighted := strings.HasPrefix(method, "weighted")
	models, err := r.segments(seg, weighted)
	if err != nil {
		return false, err
	}
	mode := leafScore
	switch {
	case fo.Task == forest.Regression && (method == "sum" || method == "average" || method == "weightedAverage"):
		fo.Combine = forest.Sum
		if method != "sum" {
			fo.Combine = forest.Average
		}
	case fo.Task == forest.Classification && (method == "average" || method == "weightedAverage"):
		fo.Combine, mode = forest.Average, leafProb
	case fo.Task == forest.Classification && (method == "majorityVote" || method == "weightedMajorityVote"):
		fo.Combine, mode = forest.Vote, leafVote
	default:
		return false, r.errf(seg, "multipleModelMethod %q for a %s model is not supported\nhint: sawmill reads sum, average and weightedAverage (regression), average, weightedAverage, majorityVote and weightedMajorityVote (classification), and modelChain as boosted classifiers are written", clip([]byte(method)), fo.Task)
	}
	for _, m := range models {
		if m.name != "TreeModel" {
			return false, r.errf(m, "a %s in a %s segmentation; sawmill reads TreeModels there", m.name, method)
		}
		if fn := m.attrOr("functionName", ""); fn != string(fo.Task) {
			return false, r.errf(m, "functionName %q inside a %s model", clip([]byte(fn)), fo.Task)
		}
		t, err := r.segmentTree(seg, m, mode, fo.Classes, s)
		if err != nil {
			return false, err
		}
		fo.Trees = append(fo.Trees, t)
	}
	tg := mm.child("Targets")
	if tg == nil {
		return true, nil
	}
	if fo.Task != forest.Regression {
		return false, r.errf(tg, "Targets on a classifier are not supported")
	}
	f, c, err := r.targets(tg)
	if err != nil {
		return false, err
	}
	fo.BaseScore = []float64{c / f}
	fo.TransformScale = f
	if f == 1 && fo.Combine == forest.Average {
		return true, nil // the mean, then + c: the format's own order
	}
	return c == 0, nil
}

// chain converts a modelChain as boosted classifiers are written: one
// regression MiningModel per class score (a sum of TreeModels with Targets
// rescaling, published by an OutputField), then a RegressionModel that
// turns the scores into probabilities with softmax (several classes) or
// logit (two classes, the score of the second).
func (r *pmmlReader) chain(mm *xel, seg *xel, fo *forest.Forest, s pschema) (bool, error) {
	models, err := r.segments(seg, false)
	if err != nil {
		return false, err
	}
	if fo.Task != forest.Classification || len(models) < 2 || models[len(models)-1].name != "RegressionModel" {
		return false, r.errf(seg, "a modelChain that is not a boosted classifier (sums of trees, then a RegressionModel); sawmill reads only that layout")
	}
	rm := models[len(models)-1]
	sums := models[:len(models)-1]
	// Which sum feeds which class.
	out := map[string]int{} // output field name -> index in sums
	scale := math.NaN()
	base := make([]float64, len(sums))
	exact := true
	var trees [][]forest.Tree
	for i, m := range sums {
		if m.name != "MiningModel" || m.attrOr("functionName", "") != "regression" {
			return false, r.errf(m, "a %s in a modelChain; sawmill reads regression MiningModels (sums of trees) before the final RegressionModel", m.name)
		}
		ss, _, err := r.schema(m, s)
		if err != nil {
			return false, err
		}
		sg := m.child("Segmentation")
		if sg == nil || sg.attrOr("multipleModelMethod", "") != "sum" {
			return false, r.errf(m, "sawmill reads a modelChain whose scores are sums of trees (multipleModelMethod sum)")
		}
		tms, err := r.segments(sg, false)
		if err != nil {
			return false, err
		}
		var ts []forest.Tree
		for _, tm := range tms {
			if tm.name != "TreeModel" || tm.attrOr("functionName", "") != "regression" {
				return false, r.errf(tm, "a %s in a sum of trees; sawmill reads regression TreeModels there", tm.name)
			}
			t, err := r.segmentTree(sg, tm, leafScore, nil, ss)
			if err != nil {
				return false, err
			}
			ts = append(ts, t)
		}
		trees = append(trees, ts)
		f, c := 1.0, 0.0
		if tg := m.child("Targets"); tg != nil {
			if f, c, err = r.targets(tg); err != nil {
				return false, err
			}
		}
		if !math.IsNaN(scale) && f != scale {
			return false, r.errf(m, "rescaleFactor %v differs from the first score's %v; sawmill reads one factor for all classes", f, scale)
		}
		scale = f
		base[i] = c / f
		exact = exact && c == 0
		o := m.child("Output")
		var ofs []*xel
		if o != nil {
			ofs = o.children("OutputField")
		}
		if len(ofs) != 1 || ofs[0].attrOr("feature", "predictedValue") != "predictedValue" {
			return false, r.errf(m, "sawmill reads a modelChain score published by one OutputField of feature predictedValue")
		}
		out[ofs[0].attrOr("name", "")] = i
	}
	norm := rm.attrOr("normalizationMethod", "none")
	tables := rm.children("RegressionTable")
	// table returns the sum a RegressionTable passes on (coefficient 1,
	// intercept 0), or -1 for a table of intercept 0 and no predictor.
	table := func(t *xel) (int, error) {
		if ic, err := r.number(t, "intercept", math.NaN()); err != nil || ic != 0 {
			return 0, r.errf(t, "intercept is not 0; sawmill reads the tables a boosted classifier's chain ends with")
		}
		for _, k := range t.kids {
			if k.name != "NumericPredictor" && k.name != "Extension" && k.name != "" {
				return 0, r.errf(k, "a %s; sawmill reads tables of one NumericPredictor", k.name)
			}
		}
		np := t.children("NumericPredictor")
		if len(np) == 0 {
			return -1, nil
		}
		c, err := r.number(np[0], "coefficient", math.NaN())
		if err != nil {
			return 0, err
		}
		i, ok := out[np[0].attrOr("name", "")]
		if len(np) != 1 || c != 1 || np[0].attrOr("exponent", "1") != "1" || !ok {
			return 0, r.errf(t, "sawmill reads tables that pass one score of the chain on with coefficient 1")
		}
		return i, nil
	}
	classOf := map[string]int{}
	for k, c := range fo.Classes {
		classOf[c] = k
	}
	// entry returns a table's class and the sum it passes on (-1: none).
	entry := func(t *xel) (k, i int, err error) {
		k, ok := classOf[t.attrOr("targetCategory", "")]
		if !ok {
			return 0, 0, r.errf(t, "targetCategory %q is not one of the target's classes", clip([]byte(t.attrOr("targetCategory", ""))))
		}
		i, err = table(t)
		return k, i, err
	}
	outputOf := make([]int, len(sums)) // sum i adds to output outputOf[i]
	seenClass := make([]bool, len(fo.Classes))
	seenSum := make([]bool, len(sums))
	switch {
	case norm == "logit" && len(fo.Classes) == 2 && len(tables) == 2 && len(sums) == 1:
		for _, t := range tables {
			k, i, err := entry(t)
			if err != nil {
				return false, err
			}
			if (i >= 0) != (k == 1) || seenClass[k] {
				return false, r.errf(t, "sawmill reads a logit table for the second class and an empty one for the first")
			}
			seenClass[k] = true
		}
		fo.Transform = forest.Logistic
	case norm == "softmax" && len(tables) == len(fo.Classes) && len(sums) == len(fo.Classes) && len(sums) > 2:
		for _, t := range tables {
			k, i, err := entry(t)
			if err != nil {
				return false, err
			}
			if i < 0 || seenSum[i] || seenClass[k] {
				return false, r.errf(t, "every class's table must pass on a score of its own")
			}
			seenSum[i], seenClass[k] = true, true
			outputOf[i] = k
		}
		fo.Transform = forest.Softmax
	default:
		return false, r.errf(rm, "normalizationMethod %q with %d tables for %d classes: sawmill reads logit over one score (two classes) and softmax over one score per class", clip([]byte(norm)), len(tables), len(fo.Classes))
	}
	r.notes = append(r.notes, fmt.Sprintf("the RegressionModel's %s normalization is the format's %s, whose formula may differ from the evaluator's in the last bits", norm, fo.Transform))
	fo.Combine = forest.Sum
	fo.TransformScale = scale
	fo.BaseScore = make([]float64, len(fo.Classes))
	if fo.Transform == forest.Logistic {
		fo.BaseScore = base
		for _, ts := range trees {
			fo.Trees = append(fo.Trees, ts...)
		}
		return exact, nil
	}
	for i, ts := range trees {
		fo.BaseScore[outputOf[i]] = base[i]
		for _, t := range ts {
			t.HasOutput, t.Output = true, outputOf[i]
			fo.Trees = append(fo.Trees, t)
		}
	}
	return exact, nil
}
