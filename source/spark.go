package source

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path"
	"slices"
	"sort"
	"strconv"
	"strings"

	"github.com/parquet-go/parquet-go"

	"github.com/sawmill-dev/sawmill/forest"
)

// The Spark ML reader. A model saved by Spark ML's save() is a folder:
//
//	metadata/part-00000        one line of JSON: class, params, numFeatures, numClasses, numTrees
//	data/part-*.parquet        the nodes (a single tree: one row per node;
//	                           an ensemble: treeID and a nodeData struct per row)
//	treesMetadata/part-*.parquet  ensembles only: treeID, each tree's metadata, its weight
//
// A saved PipelineModel holds its stages under stages/NN_uid/, each a folder
// like the above; sawmill reads one whose last stage is a tree model and
// whose other stages are VectorAssemblers (which name the input columns).
//
// Semantics, read from the bytecode of spark-mllib_2.13 4.0.1 (javap -c) and
// measured with PySpark 4.0.1 (scripts/spark_fixtures.py):
//
//   - ContinuousSplit.shouldGoLeft is x <= threshold (dcmpg): NaN goes right.
//   - CategoricalSplit keeps isLeft = len(leftCategories) <= numCategories/2
//     (integer division) and, when isLeft, the left categories, else their
//     complement in 0..numCategories-1; shouldGoLeft is "x in the set" or
//     "x not in the set". The set holds doubles compared with Scala's numeric
//     equality (-0 is category 0, 2.5 is none). So a value outside every
//     category (unseen code, negative, fraction, ±Inf, NaN) goes right at an
//     isLeft split and LEFT at the others: format 2 writes the latter as the
//     complement set with its children swapped, category_match exact, NaN
//     to the side it takes in Spark.
//   - DecisionTreeClassificationModel: rawPrediction is the leaf's
//     impurityStats (class counts), probability that divided by its sum
//     (summed in order): combine sum of the counts, normalize.
//   - RandomForestClassificationModel.predictRaw adds, per tree in order,
//     counts(i)/total (total the counts summed in order; a tree with total 0
//     adds nothing); probability normalises that: the leaves hold
//     counts/total, combine sum, normalize.
//   - RandomForestRegressionModel: the trees' predictions summed in order,
//     divided by the number of trees: combine average.
//   - GBT models: the margin is BLAS.nativeBLAS.ddot(trees' predictions,
//     tree weights). With F2J's reference ddot that is the products, each
//     rounded, added in order, which is what the leaves (weight·prediction)
//     and combine sum give. Spark 4.0.1 found a native BLAS here (JNIBLAS
//     over Debian's OpenBLAS, libblas.so.3), which adds in an order and with
//     roundings of its own: on the fixtures 72 of 308 and 162 of 286 margins
//     equal the ordered sum, the rest are within 2.8·2^-52·Σ|terms|. Not bit
//     for bit, and no fixed order can be: it depends on the BLAS Spark finds.
//   - GBTClassificationModel: rawPrediction [-m, m], probability
//     p0 = 1/(1+exp(2m)), p1 = 1-p0 (LogLoss.computeProbability of -m):
//     logistic with transform_scale 2, equal to Spark's p1 within a few
//     ulps, not bit for bit (format 2 has no 1-1/(1+e^z) form).

// sparkFormat reads Spark ML model folders (see Load).
var sparkFormat = Format{
	Name:     "spark",
	Describe: "a Spark ML model folder (DecisionTree, RandomForest, GBT; alone or the last stage of a PipelineModel)",
	Detect:   func([]byte) bool { return false }, // a folder, never a file: see DetectDir
	Read: func(_ []byte, name string, _ Options) (*Result, error) {
		return nil, fmt.Errorf("%s: a Spark ML model is a folder, not a file\nhint: give the folder that holds metadata/ and data/", name)
	},
	DetectDir: func(dir string) bool {
		return isSparkFolder(os.DirFS(dir))
	},
	ReadDir: func(dir string, o Options) (*Result, error) {
		return readSpark(os.DirFS(dir), dir, o)
	},
}

// Spark's model classes that sawmill reads.
const (
	sparkDTC      = "org.apache.spark.ml.classification.DecisionTreeClassificationModel"
	sparkDTR      = "org.apache.spark.ml.regression.DecisionTreeRegressionModel"
	sparkRFC      = "org.apache.spark.ml.classification.RandomForestClassificationModel"
	sparkRFR      = "org.apache.spark.ml.regression.RandomForestRegressionModel"
	sparkGBTC     = "org.apache.spark.ml.classification.GBTClassificationModel"
	sparkGBTR     = "org.apache.spark.ml.regression.GBTRegressionModel"
	sparkPipeline = "org.apache.spark.ml.PipelineModel"
	sparkAssemble = "org.apache.spark.ml.feature.VectorAssembler"
)

// sparkMaxNodes bounds the nodes read from a model's data: parquet encodes
// constant columns in next to nothing, so the file size alone does not.
const sparkMaxNodes = 1 << 24

// sparkMaxFeatures bounds numFeatures: 2^20, four times HashingTF's default
// of 2^18 (Spark ML's documentation; from memory).
const sparkMaxFeatures = 1 << 20

// sparkMeta is metadata/part-00000.
type sparkMeta struct {
	Class           string                     `json:"class"`
	SparkVersion    string                     `json:"sparkVersion"`
	UID             string                     `json:"uid"`
	ParamMap        map[string]json.RawMessage `json:"paramMap"`
	DefaultParamMap map[string]json.RawMessage `json:"defaultParamMap"`
	NumFeatures     *int                       `json:"numFeatures"`
	NumClasses      *int                       `json:"numClasses"`
	NumTrees        *int                       `json:"numTrees"`
}

// param returns the value of a param, set or default, decoded into v, and
// whether there was one.
func (m *sparkMeta) param(key string, v any) (bool, error) {
	raw, ok := m.ParamMap[key]
	if !ok {
		raw, ok = m.DefaultParamMap[key]
	}
	if !ok {
		return false, nil
	}
	return true, json.Unmarshal(raw, v)
}

// sparkSplit, sparkNode and sparkEnsembleNode are the rows of data/ (Spark's
// NodeData and EnsembleNodeData).
type sparkSplit struct {
	FeatureIndex              int32     `parquet:"featureIndex"`
	LeftCategoriesOrThreshold []float64 `parquet:"leftCategoriesOrThreshold,optional,list"`
	NumCategories             int32     `parquet:"numCategories"`
}

type sparkNode struct {
	ID            int32       `parquet:"id"`
	Prediction    float64     `parquet:"prediction"`
	ImpurityStats []float64   `parquet:"impurityStats,optional,list"`
	LeftChild     int32       `parquet:"leftChild"`
	RightChild    int32       `parquet:"rightChild"`
	Split         *sparkSplit `parquet:"split,optional"`
}

type sparkEnsembleNode struct {
	TreeID   int32      `parquet:"treeID"`
	NodeData *sparkNode `parquet:"nodeData,optional"`
}

type sparkTreeMeta struct {
	TreeID  int32   `parquet:"treeID"`
	Weights float64 `parquet:"weights"`
}

// sparkTreeTuple is a row of treesMetadata as Spark 4.3.0 writes it
// (measured): the same (treeID, metadata, weight) tuple, with the column
// names Scala gives a tuple.
type sparkTreeTuple struct {
	TreeID  int32   `parquet:"_1"`
	Weights float64 `parquet:"_3"`
}

// readSparkTreeWeights reads treesMetadata/ in either form.
func readSparkTreeWeights(fsys fs.FS, name string) ([]sparkTreeMeta, error) {
	tm, err := readSparkParquet[sparkTreeMeta](fsys, name, "treesMetadata", "treeID", "weights")
	if err == nil {
		return tm, nil
	}
	tt, err2 := readSparkParquet[sparkTreeTuple](fsys, name, "treesMetadata", "_1", "_2", "_3")
	if err2 != nil {
		return nil, err
	}
	tm = make([]sparkTreeMeta, len(tt))
	for i, t := range tt {
		tm[i] = sparkTreeMeta(t)
	}
	return tm, nil
}

// isSparkFolder reports whether fsys holds metadata/part-* (a saved model or
// pipeline).
func isSparkFolder(fsys fs.FS) bool {
	parts, err := fs.Glob(fsys, "metadata/part-*")
	return err == nil && len(parts) > 0
}

// readSpark reads the model folder fsys; name (the folder's path) starts
// every message.
func readSpark(fsys fs.FS, name string, o Options) (*Result, error) {
	meta, err := readSparkMeta(fsys, name)
	if err != nil {
		return nil, err
	}
	var notes []string
	var features []string
	if meta.Class == sparkPipeline {
		var sub fs.FS
		var subName string
		sub, subName, features, notes, err = sparkPipelineStages(fsys, name, meta)
		if err != nil {
			return nil, err
		}
		fsys, name = sub, subName
		if meta, err = readSparkMeta(fsys, name); err != nil {
			return nil, err
		}
	}
	f, more, err := readSparkModel(fsys, name, meta)
	if err != nil {
		return nil, err
	}
	notes = append(notes, more...)
	if features != nil {
		if len(features) != len(f.Features) {
			return nil, fmt.Errorf("%s: the VectorAssembler names %d input columns, the model has %d features\nhint: sawmill reads pipelines whose assembler takes one number per column; --features names them instead",
				name, len(features), len(f.Features))
		}
		f.Features = features
	}
	rn, err := o.rename(f, name)
	if err != nil {
		return nil, err
	}
	notes = append(notes, rn...)
	if o.Missing != nil {
		f.HasMissingValue, f.MissingValue = true, *o.Missing
	}
	if err := f.Validate(name); err != nil {
		return nil, err
	}
	return &Result{Forest: f, Notes: notes}, nil
}

// readSparkMeta reads and decodes metadata/part-* of fsys.
func readSparkMeta(fsys fs.FS, name string) (*sparkMeta, error) {
	parts, err := fs.Glob(fsys, "metadata/part-*")
	if err != nil || len(parts) == 0 {
		return nil, fmt.Errorf("%s: no metadata/part-* file: not a Spark ML model folder\nhint: give the folder that Spark's save() wrote", name)
	}
	data, err := fs.ReadFile(fsys, parts[0])
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path.Join(name, parts[0]), err)
	}
	return parseSparkMeta(data, path.Join(name, parts[0]))
}

// parseSparkMeta decodes one metadata file (its first line; Spark writes
// one JSON object per line).
func parseSparkMeta(data []byte, name string) (*sparkMeta, error) {
	if len(data) > 1<<20 {
		return nil, fmt.Errorf("%s: %d bytes of metadata, more than a Spark model writes", name, len(data))
	}
	line := data
	if i := strings.IndexByte(string(data), '\n'); i >= 0 {
		line = data[:i]
	}
	var m sparkMeta
	if err := json.Unmarshal(line, &m); err != nil {
		return nil, fmt.Errorf("%s: not Spark ML metadata: %v", name, err)
	}
	if m.Class == "" {
		return nil, fmt.Errorf("%s: no \"class\" in the metadata", name)
	}
	return &m, nil
}

// sparkPipelineStages finds the last stage of a PipelineModel and the input
// names its VectorAssembler gives.
func sparkPipelineStages(fsys fs.FS, name string, meta *sparkMeta) (fs.FS, string, []string, []string, error) {
	var uids []string
	if ok, err := meta.param("stageUids", &uids); !ok || err != nil || len(uids) == 0 {
		return nil, "", nil, nil, fmt.Errorf("%s: PipelineModel metadata without a list of stageUids", name)
	}
	entries, err := fs.ReadDir(fsys, "stages")
	if err != nil {
		return nil, "", nil, nil, fmt.Errorf("%s: PipelineModel without stages/: %v", name, err)
	}
	var notes []string
	var features []string
	var last fs.FS
	var lastName string
	for i, uid := range uids {
		dir := ""
		for _, e := range entries {
			// Spark names a stage's folder "<index>_<uid>", the index
			// zero-padded to the number of digits of the stage count.
			if idx, rest, ok := strings.Cut(e.Name(), "_"); ok && rest == uid {
				if n, err := strconv.Atoi(idx); err == nil && n == i {
					dir = e.Name()
				}
			}
		}
		if dir == "" {
			return nil, "", nil, nil, fmt.Errorf("%s: stage %d (%s): no folder stages/%d_%s", name, i, uid, i, uid)
		}
		sub, err := fs.Sub(fsys, path.Join("stages", dir))
		if err != nil {
			return nil, "", nil, nil, fmt.Errorf("%s: %v", name, err)
		}
		subName := path.Join(name, "stages", dir)
		sm, err := readSparkMeta(sub, subName)
		if err != nil {
			return nil, "", nil, nil, err
		}
		if i == len(uids)-1 {
			last, lastName = sub, subName
			break
		}
		if sm.Class != sparkAssemble {
			return nil, "", nil, nil, fmt.Errorf("%s: stage %d is a %s: sawmill reads pipelines of VectorAssemblers ending in a tree model\nhint: save the tree model alone (model.stages[-1].save(...)) and give the inputs it sees with --features", subName, i, shortClass(sm.Class))
		}
		var cols []string
		if ok, err := sm.param("inputCols", &cols); !ok || err != nil {
			return nil, "", nil, nil, fmt.Errorf("%s: VectorAssembler without inputCols", subName)
		}
		features = append(features[:0], cols...)
		var hi string
		if ok, _ := sm.param("handleInvalid", &hi); ok && hi != "keep" {
			notes = append(notes, fmt.Sprintf("the VectorAssembler's handleInvalid is %q: Spark refuses or drops rows with a missing value, sawmill scores them (NaN goes where Spark's trees send it)", hi))
		}
	}
	if features == nil {
		return nil, "", nil, nil, fmt.Errorf("%s: the pipeline has no VectorAssembler to name its inputs", name)
	}
	return last, lastName, features, notes, nil
}

// shortClass drops the package of a Java class name.
func shortClass(c string) string {
	return c[strings.LastIndexByte(c, '.')+1:]
}

// readSparkModel reads one tree model's folder into a Forest (not yet
// validated, features named f0, f1, ...).
func readSparkModel(fsys fs.FS, name string, meta *sparkMeta) (*forest.Forest, []string, error) {
	ensemble := false
	f := &forest.Forest{InputPrecision: forest.Float64, CategoryMatch: forest.MatchExact}
	switch meta.Class {
	case sparkDTC, sparkRFC:
		f.Task, f.Combine, f.Transform = forest.Classification, forest.Sum, forest.Normalize
		ensemble = meta.Class == sparkRFC
	case sparkDTR:
		f.Task, f.Combine, f.Transform = forest.Regression, forest.Sum, forest.NoTransform
	case sparkRFR:
		f.Task, f.Combine, f.Transform = forest.Regression, forest.Average, forest.NoTransform
		ensemble = true
	case sparkGBTC:
		f.Task, f.Combine, f.Transform, f.TransformScale = forest.Classification, forest.Sum, forest.Logistic, 2
		ensemble = true
	case sparkGBTR:
		f.Task, f.Combine, f.Transform = forest.Regression, forest.Sum, forest.NoTransform
		ensemble = true
	case sparkPipeline:
		return nil, nil, fmt.Errorf("%s: a PipelineModel inside a PipelineModel: sawmill reads one level", name)
	default:
		return nil, nil, fmt.Errorf("%s: %s is not a tree model sawmill reads\nhint: sawmill reads DecisionTree, RandomForest and GBT classification and regression models", name, meta.Class)
	}
	if meta.NumFeatures == nil || *meta.NumFeatures < 1 || *meta.NumFeatures > sparkMaxFeatures {
		return nil, nil, fmt.Errorf("%s: metadata: numFeatures is missing or out of range", name)
	}
	nf := *meta.NumFeatures
	for i := range nf {
		f.Features = append(f.Features, "f"+strconv.Itoa(i))
	}
	k := 1
	if f.Task == forest.Classification {
		if meta.Class == sparkGBTC && meta.NumClasses == nil {
			two := 2 // Spark 4.0's GBTClassificationModel metadata has no numClasses: it is binary
			meta.NumClasses = &two
		}
		if meta.NumClasses == nil || *meta.NumClasses < 2 || *meta.NumClasses > 1<<16 {
			return nil, nil, fmt.Errorf("%s: metadata: numClasses is missing or out of range", name)
		}
		if meta.Class == sparkGBTC && *meta.NumClasses != 2 {
			return nil, nil, fmt.Errorf("%s: metadata: a GBT classifier of %d classes (Spark's are binary)", name, *meta.NumClasses)
		}
		for i := range *meta.NumClasses {
			f.Classes = append(f.Classes, strconv.Itoa(i))
		}
		k = *meta.NumClasses
		if meta.Class == sparkGBTC {
			k = 1
		}
		var th []float64
		if ok, err := meta.param("thresholds", &th); ok && err == nil && th != nil {
			return nil, nil, fmt.Errorf("%s: the model's thresholds param is set: Spark then picks the class by probability/threshold, sawmill by the largest probability\nhint: clear thresholds before saving", name)
		}
	}
	f.BaseScore = make([]float64, k)

	var trees map[int32][]sparkNode
	var weights []float64
	numTrees := 1
	if ensemble {
		if meta.NumTrees == nil || *meta.NumTrees < 1 || *meta.NumTrees > 1<<20 {
			return nil, nil, fmt.Errorf("%s: metadata: numTrees is missing or out of range", name)
		}
		numTrees = *meta.NumTrees
		rows, err := readSparkParquet[sparkEnsembleNode](fsys, name, "data", "treeID", "nodeData")
		if err != nil {
			return nil, nil, err
		}
		trees = map[int32][]sparkNode{}
		for _, r := range rows {
			if r.TreeID < 0 || int(r.TreeID) >= numTrees {
				return nil, nil, fmt.Errorf("%s: data: tree %d out of range (numTrees is %d)", name, r.TreeID, numTrees)
			}
			if r.NodeData == nil {
				return nil, nil, fmt.Errorf("%s: data: tree %d: a row without nodeData", name, r.TreeID)
			}
			trees[r.TreeID] = append(trees[r.TreeID], *r.NodeData)
		}
		tm, err := readSparkTreeWeights(fsys, name)
		if err != nil {
			return nil, nil, err
		}
		weights = make([]float64, numTrees)
		seen := make([]bool, numTrees)
		for _, r := range tm {
			if r.TreeID < 0 || int(r.TreeID) >= numTrees || seen[r.TreeID] {
				return nil, nil, fmt.Errorf("%s: treesMetadata: tree %d out of range or listed twice", name, r.TreeID)
			}
			if math.IsNaN(r.Weights) || math.IsInf(r.Weights, 0) {
				return nil, nil, fmt.Errorf("%s: treesMetadata: tree %d: weight %v is not finite", name, r.TreeID, r.Weights)
			}
			seen[r.TreeID], weights[r.TreeID] = true, r.Weights
		}
		if i := slices.Index(seen, false); i >= 0 {
			return nil, nil, fmt.Errorf("%s: treesMetadata: no weight for tree %d", name, i)
		}
	} else {
		rows, err := readSparkParquet[sparkNode](fsys, name, "data", "id", "prediction", "leftChild", "rightChild", "split")
		if err != nil {
			return nil, nil, err
		}
		trees = map[int32][]sparkNode{0: rows}
	}

	var notes []string
	swapped := 0
	for ti := range numTrees {
		nodes := trees[int32(ti)]
		if len(nodes) == 0 {
			return nil, nil, fmt.Errorf("%s: data: tree %d has no nodes", name, ti)
		}
		w := 1.0
		if weights != nil {
			w = weights[ti]
		}
		t, sw, err := sparkTree(nodes, nf, k, meta.Class, w, fmt.Sprintf("%s: tree %d", name, ti))
		if err != nil {
			return nil, nil, err
		}
		swapped += sw
		f.Trees = append(f.Trees, t)
	}
	notes = append(notes, fmt.Sprintf("Spark %s %s, %d tree(s)", meta.SparkVersion, shortClass(meta.Class), numTrees))
	if swapped > 0 {
		notes = append(notes, fmt.Sprintf("%d categorical split(s) whose left side holds more than half the categories written as their complement with the children swapped: unseen categories go left there, as in Spark", swapped))
	}
	if meta.Class == sparkGBTC || meta.Class == sparkGBTR {
		notes = append(notes, "GBT: Spark adds the weighted trees with BLAS ddot; with a native BLAS its margin can differ from the ordered sum sawmill computes by a few ulps")
	}
	if meta.Class == sparkGBTC {
		notes = append(notes, "GBT: the probability is the logistic of 2·margin; Spark's 1-1/(1+exp(2·margin)) can differ from it by a few ulps")
	}
	return f, notes, nil
}

// sparkTree builds one tree from its nodes, indexed by their ids, which must
// be 0..n-1 once each. loc ("folder: tree 3") starts every message. It
// returns how many categorical splits it wrote as their complement.
func sparkTree(nodes []sparkNode, nf, k int, class string, weight float64, loc string) (forest.Tree, int, error) {
	n := len(nodes)
	t := forest.Tree{
		Feature: make([]int, n), Threshold: make([]float64, n),
		Left: make([]int, n), Right: make([]int, n), MissingLeft: make([]bool, n),
		Value: make([]float64, n*k),
	}
	seen := make([]bool, n)
	swapped := 0
	hasCats := false
	cats := make([][]int32, n)
	for _, nd := range nodes {
		id := int(nd.ID)
		if id < 0 || id >= n {
			return t, 0, fmt.Errorf("%s, node %d: id out of range (the tree has %d nodes)", loc, id, n)
		}
		if seen[id] {
			return t, 0, fmt.Errorf("%s, node %d: listed twice", loc, id)
		}
		seen[id] = true
		l, r := int(nd.LeftChild), int(nd.RightChild)
		if l == -1 && r == -1 {
			t.Feature[id], t.Left[id], t.Right[id] = -1, -1, -1
			if err := sparkLeaf(&nd, class, weight, t.Value[id*k:(id+1)*k]); err != nil {
				return t, 0, fmt.Errorf("%s, node %d: %v", loc, id, err)
			}
			continue
		}
		if l < 0 || l >= n || r < 0 || r >= n {
			return t, 0, fmt.Errorf("%s, node %d: child %d or %d out of range (the tree has %d nodes)", loc, id, l, r, n)
		}
		if l == id || r == id || l == r {
			return t, 0, fmt.Errorf("%s, node %d: children %d and %d make a cycle", loc, id, l, r)
		}
		s := nd.Split
		if s == nil {
			return t, 0, fmt.Errorf("%s, node %d: a split node without a split", loc, id)
		}
		if s.FeatureIndex < 0 || int(s.FeatureIndex) >= nf {
			return t, 0, fmt.Errorf("%s, node %d: feature %d out of range (numFeatures is %d)", loc, id, s.FeatureIndex, nf)
		}
		t.Feature[id], t.Left[id], t.Right[id] = int(s.FeatureIndex), l, r
		if s.NumCategories == -1 {
			if len(s.LeftCategoriesOrThreshold) != 1 {
				return t, 0, fmt.Errorf("%s, node %d: a continuous split with %d thresholds", loc, id, len(s.LeftCategoriesOrThreshold))
			}
			th := s.LeftCategoriesOrThreshold[0]
			if math.IsNaN(th) || math.IsInf(th, 0) {
				return t, 0, fmt.Errorf("%s, node %d: threshold is %v", loc, id, th)
			}
			t.Threshold[id] = th
			continue
		}
		set, isLeft, err := sparkCategories(s)
		if err != nil {
			return t, 0, fmt.Errorf("%s, node %d: %v", loc, id, err)
		}
		hasCats = true
		cats[id] = set
		if !isLeft {
			// Spark: left exactly when x is not in the set; the format: left
			// exactly when x is in it. Swap the children. NaN and every
			// other non-member still reach Spark's left child, now on the
			// format's right; missing_left stays false.
			t.Left[id], t.Right[id] = r, l
			swapped++
		}
	}
	if hasCats {
		t.Categories = cats
	}
	return t, swapped, nil
}

// sparkCategories returns the set of categories a CategoricalSplit tests
// (the left ones, or their complement when Spark keeps that) and whether a
// member goes left.
func sparkCategories(s *sparkSplit) ([]int32, bool, error) {
	nc := int(s.NumCategories)
	if nc < 1 || nc > forest.MaxCategory-1 {
		return nil, false, fmt.Errorf("numCategories %d out of range", nc)
	}
	if len(s.LeftCategoriesOrThreshold) > nc {
		return nil, false, fmt.Errorf("%d left categories of %d", len(s.LeftCategoriesOrThreshold), nc)
	}
	left := make([]int32, 0, len(s.LeftCategoriesOrThreshold))
	for _, c := range s.LeftCategoriesOrThreshold {
		if !(c >= 0 && c < float64(nc)) || c != math.Trunc(c) {
			return nil, false, fmt.Errorf("category %v is not one of 0..%d", c, nc-1)
		}
		left = append(left, int32(c))
	}
	sort.Slice(left, func(i, j int) bool { return left[i] < left[j] })
	for i := 1; i < len(left); i++ {
		if left[i] == left[i-1] {
			return nil, false, fmt.Errorf("category %d listed twice", left[i])
		}
	}
	// CategoricalSplit's constructor: isLeft = leftCategories.length <=
	// numCategories / 2 (integer division).
	if len(left) <= nc/2 {
		return left, true, nil
	}
	if nc > 1<<20 {
		return nil, false, fmt.Errorf("numCategories %d: too many to write the complement", nc)
	}
	right := make([]int32, 0, nc-len(left))
	for c := range int32(nc) {
		if _, found := slices.BinarySearch(left, c); !found {
			right = append(right, c)
		}
	}
	return right, false, nil
}

// sparkLeaf fills a leaf's value vector.
func sparkLeaf(nd *sparkNode, class string, weight float64, out []float64) error {
	switch class {
	case sparkDTC, sparkRFC:
		st := nd.ImpurityStats
		if len(st) != len(out) {
			return fmt.Errorf("%d class counts in impurityStats, the model has %d classes", len(st), len(out))
		}
		total := 0.0
		for _, c := range st {
			if !(c >= 0) || math.IsInf(c, 0) {
				return fmt.Errorf("class count %v is not a finite count", c)
			}
			total += c // Scala's sum: in order
		}
		if class == sparkDTC {
			copy(out, st)
			return nil
		}
		if total != 0 {
			for j, c := range st {
				out[j] = c / total
			}
		}
		return nil
	case sparkGBTC, sparkGBTR:
		p := nd.Prediction
		if math.IsNaN(p) || math.IsInf(p, 0) {
			return fmt.Errorf("prediction %v is not finite", p)
		}
		out[0] = weight * p
		if math.IsInf(out[0], 0) {
			return fmt.Errorf("weight %v times prediction %v overflows", weight, p)
		}
		return nil
	default:
		if math.IsNaN(nd.Prediction) || math.IsInf(nd.Prediction, 0) {
			return fmt.Errorf("prediction %v is not finite", nd.Prediction)
		}
		out[0] = nd.Prediction
		return nil
	}
}

// readSparkParquet reads every row of dir/part-*.parquet (in name order)
// as T; each file must have the top-level columns named in cols. Parquet
// readers can panic on corrupt files; that is turned into an error naming
// the file.
func readSparkParquet[T any](fsys fs.FS, name, dir string, cols ...string) ([]T, error) {
	parts, err := fs.Glob(fsys, dir+"/part-*")
	if err != nil || len(parts) == 0 {
		return nil, fmt.Errorf("%s: no %s/part-*.parquet file", name, dir)
	}
	var all []T
	for _, p := range parts {
		if strings.HasSuffix(p, ".crc") {
			continue
		}
		rows, err := readParquetFile[T](fsys, p, sparkMaxNodes-len(all), cols)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", path.Join(name, p), err)
		}
		all = append(all, rows...)
	}
	return all, nil
}

// readParquetFile reads at most limit rows of one parquet file that has
// the top-level columns cols.
func readParquetFile[T any](fsys fs.FS, p string, limit int, cols []string) (rows []T, err error) {
	data, err := fs.ReadFile(fsys, p)
	if err != nil {
		return nil, err
	}
	defer func() {
		if r := recover(); r != nil {
			rows, err = nil, fmt.Errorf("corrupt parquet file: %v", r)
		}
	}()
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		return nil, fmt.Errorf("not a parquet file: %v", err)
	}
	var have []string
	for _, fl := range pf.Schema().Fields() {
		have = append(have, fl.Name())
	}
	for _, c := range cols {
		if !slices.Contains(have, c) {
			return nil, fmt.Errorf("no column %q (the file has %s; want %s)", c, strings.Join(have, ", "), strings.Join(cols, ", "))
		}
	}
	if pf.NumRows() > int64(limit) {
		return nil, fmt.Errorf("%d rows, more than the %d nodes sawmill reads", pf.NumRows(), sparkMaxNodes)
	}
	r := parquet.NewGenericReader[T](pf)
	defer r.Close()
	buf := make([]T, 1024)
	for {
		n, err := r.Read(buf)
		rows = append(rows, buf[:n]...)
		if len(rows) > limit {
			return nil, fmt.Errorf("more than the %d nodes sawmill reads", sparkMaxNodes)
		}
		if errors.Is(err, io.EOF) {
			return rows, nil
		}
		if err != nil {
			return nil, fmt.Errorf("corrupt parquet file: %v", err)
		}
		if n == 0 {
			return rows, nil
		}
	}
}
