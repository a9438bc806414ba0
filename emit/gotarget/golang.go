// Package gotarget emits a compiled forest as a dependency-free Go package.
//
// The package holds
//
//	const NumFeatures, NumOutputs
//	var FeatureNames (and ClassNames for a classifier)
//	func Predict(x *[NumFeatures]float64) [NumOutputs]float64
//	func PredictClass(x *[NumFeatures]float64) int   // classifiers
//
// in model.go, and in batch.go
//
//	func PredictBatch(rows [][]float64, out []float64) error
//	func PredictBatchWorkers(rows [][]float64, out []float64, workers int) error
//
// (each row scored by Predict, on one goroutine or several),
// and scores exactly like the interpreter: comparisons as the Program states
// them, NaN routed by each split's missing side without a NaN test, tree
// outputs added in tree order, the transform computed with the same
// operations as forest.ApplyTransform. Beside it goes model_test.go, which
// checks a handful of rows against the outputs recorded at emit time.
//
// Layouts (see Options.Layout): nested if/else code, one function per tree;
// a table of nodes kept as one binary string and walked by one loop, eight
// trees in lockstep (four in forests deeper than 12), whose PredictBatch
// walks blocks of rows tree group by tree group (rows.go); and a branchless
// implicit-heap descent for shallow trees. Auto picks by node count and
// number of trees (Resolve).
//
// Format version 2 (set splits, zero_missing, a missing value, trees of one
// output, float32 accumulation with an emitted copy of glibc's expf, the
// scale and the new transforms) is written in every layout; v2.go says how.
package gotarget

import (
	"bytes"
	"fmt"
	"go/token"
	"math"
	"strconv"
	"strings"

	"github.com/dave/jennifer/jen"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// Options controls the emitted package.
type Options struct {
	// Package is the Go package name; "model" when empty. It must be a Go
	// identifier, not a keyword, "main" or "_".
	Package string
	// Layout is emit.Auto (when empty), emit.Nested, emit.Table or
	// emit.Branchless.
	Layout string
	// Sample rows are scored in model_test.go besides the rows built from
	// the model's own leaves; each has one value per feature, NaN missing.
	Sample [][]float64
	// MaxTestRows caps the rows built from leaves; 0 means 16, < 0 none.
	MaxTestRows int
	// NoTest leaves out model_test.go.
	NoTest bool
	// Comments is the comment knob (emit.NodeComments): 0 writes a comment
	// per node for programs of at most emit.CommentNodes nodes, 1 always,
	// -1 never.
	Comments int
	// Tables says how the table layout writes its arrays: TablesAuto
	// (when empty), TablesLiteral or TablesBase64.
	Tables string
	// Version is the sawmill version the header names; emit.Version
	// when empty.
	Version string
	// lanes, when not 0, is the table walk's lockstep width instead of
	// the one chosen by depth (see gen.lanes): BenchmarkLayouts holds the
	// widths against each other.
	lanes int
	// blockRows, when not 0, is the rows of PredictBatch's blocks instead
	// of the ones chosen by size (see gen.blockRows): BenchmarkLayouts
	// holds the block sizes against each other.
	blockRows int
}

// File names in the emitted package.
const (
	SourceFile = "model.go"
	TestFile   = "model_test.go"
)

// Thresholds of Resolve's auto, from BenchmarkLayouts (forests grown on the
// invented benchmark table, timed against the interpreter in one process):
// the table's lockstep walk was 4.4 to 9.6 times the interpreter from 10k
// to 200k nodes, nested code 2 to 3 times and the heaps 3.2 to 6.4 times,
// while for two trees nested led: at 8,388 nodes (two fully grown trees)
// 111 ns a row against the table's 189 (medians of 25 passes in thread CPU
// time, load 10.8; DEVELOPERS.md, "The Go table walk"). Nested code also
// costs the Go compiler about 3.5 GB per million nodes in one package (the
// project's notes on physical limits), the table's blob about 0.1 GB.
const (
	// MaxNestedNodes is the largest forest Auto emits nested.
	MaxNestedNodes = 10_000
	// MaxNestedTrees is the most trees Auto emits nested: from four on the
	// lockstep walk pays.
	MaxNestedTrees = 3
	// MaxBranchlessDepth is the deepest tree the branchless layout pads to
	// a full heap; a tree of depth d takes 2^(d+1)-1 slots.
	MaxBranchlessDepth = 10
)

// Emit turns p into the files of one Go package.
func Emit(p *compile.Program, o Options) ([]emit.File, error) {
	if err := emit.CheckProgram(Target(), p, false); err != nil {
		return nil, err
	}
	pkg := o.Package
	if pkg == "" {
		pkg = "model"
	}
	if err := CheckPackageName(pkg); err != nil {
		return nil, err
	}
	layout, _, err := Resolve(p, o)
	if err != nil {
		return nil, err
	}
	for i, r := range o.Sample {
		if len(r) != len(p.Features) {
			return nil, fmt.Errorf("sample row %d: %d values, the model has %d features", i, len(r), len(p.Features))
		}
	}
	g := newGen(p, o, pkg, layout)
	tables, err := chooseTables(o.Tables, p.NumNodes())
	if err != nil {
		return nil, err
	}
	if g.v2 && tables == TablesLiteral {
		// The literal form does not yet spell format 2's set descriptors
		// and missing-band variants; a format 2 table is the blob.
		if o.Tables == TablesLiteral {
			return nil, fmt.Errorf("--tables literal: not yet written for format 2 models (set splits, zero-as-missing, trees of one output)\nhint: use --tables base64 or --layout nested")
		}
		tables = TablesBase64
	}
	g.tables = tables
	src, err := g.source()
	if err != nil {
		return nil, err
	}
	batch, err := g.batchSource()
	if err != nil {
		return nil, err
	}
	files := []emit.File{{Name: SourceFile, Data: src}, {Name: BatchFile, Data: batch}}
	if !o.NoTest {
		t, err := g.testSource()
		if err != nil {
			return nil, err
		}
		files = append(files, emit.File{Name: TestFile, Data: t})
	}
	return files, nil
}

// Name is the target's name on the command line and in reports.
const Name = "go"

// Layouts are the layouts Emit writes besides emit.Auto.
func Layouts() []string { return []string{emit.Nested, emit.Table, emit.Branchless} }

// Target is the Go target's entry in the registry (emit/targets).
func Target() emit.Target {
	return emit.Target{Name: Name, Layouts: Layouts(), Emit: func(p *compile.Program, s emit.Settings) ([]emit.File, error) {
		return Emit(p, Options{Package: s.Name, Layout: s.Layout, Comments: s.Comments})
	}}
}

// Resolve returns the layout Emit writes p in under o, and why. Auto picks
// nested, the readable form, for small forests of a few trees (up to
// MaxNestedTrees trees and MaxNestedNodes nodes), where it is also the
// fastest; else the table, which was the fastest layout on every larger
// forest measured, and builds in seconds at any size and any depth.
func Resolve(p *compile.Program, o Options) (layout, why string, err error) {
	switch o.Layout {
	case emit.Nested, emit.Table, emit.Branchless:
		return o.Layout, "asked for", nil
	case "", emit.Auto:
		if len(p.Trees) <= MaxNestedTrees && p.NumNodes() <= MaxNestedNodes {
			return emit.Nested, fmt.Sprintf("%d trees and %d nodes, at most %d and %d: nested code is readable and fastest", len(p.Trees), p.NumNodes(), MaxNestedTrees, MaxNestedNodes), nil
		}
		return emit.Table, fmt.Sprintf("%d trees and %d nodes, more than %d or %d: the table walk is fastest and builds in seconds", len(p.Trees), p.NumNodes(), MaxNestedTrees, MaxNestedNodes), nil
	}
	return "", "", emit.UnknownLayout(Name, o.Layout, Layouts())
}

// CheckPackageName reports whether name can name the emitted package.
func CheckPackageName(name string) error {
	switch {
	case !token.IsIdentifier(name):
		return fmt.Errorf("package name %q is not a Go identifier\nhint: use letters, digits and underscores, not starting with a digit", name)
	case name == "main" || name == "_":
		return fmt.Errorf("package name %q cannot name a library package\nhint: choose another name, such as model", name)
	}
	return nil
}

// gen holds what every part of the emitted file shares.
type gen struct {
	p        *compile.Program
	o        Options
	pkg      string
	layout   string
	k        int  // outputs
	comments bool // one comment per node
	usesNeg0 bool // some literal is -0: declare negZero
	tab      *tableData
	heap     *heapData
	tables   string // TablesLiteral or TablesBase64, for the table layout
	// Format version 2 (see v2.go).
	v2     bool     // the program needs the v2 Predict
	zero   bool     // some split has zero_missing
	perOut bool     // some tree adds to one output of several
	sets   *setData // set descriptors of the layout, nil when none
}

func newGen(p *compile.Program, o Options, pkg, layout string) *gen {
	return &gen{p: p, o: o, pkg: pkg, layout: layout, k: p.NumOutputs, comments: emit.NodeComments(o.Comments, p),
		v2: usesV2(p), zero: zeroMissing(p), perOut: perOutput(p)}
}

func (g *gen) source() ([]byte, error) {
	switch g.layout {
	case emit.Nested:
		g.sets = buildSets(g.p, false)
	case emit.Table:
		g.sets = g.tableData().sets
	case emit.Branchless:
		g.sets = g.heapData().sets
	}
	f := jen.NewFile(g.pkg)
	g.header(f)
	f.Add(g.constants())
	f.Line()
	f.Add(g.featureNames())
	if g.p.IsClassifier() {
		f.Line()
		f.Add(g.classNames())
	}
	f.Line()
	f.Add(g.predict())
	if g.p.IsClassifier() {
		f.Line()
		f.Add(g.predictClass())
	}
	var body []jen.Code
	switch g.layout {
	case emit.Nested:
		body = g.nested()
	case emit.Table:
		body = g.table()
	case emit.Branchless:
		body = g.branchless()
	default:
		panic("BUG: golang: layout " + g.layout)
	}
	body = append(body, g.setDecls()...)
	for _, c := range body {
		f.Line()
		f.Add(c)
	}
	if c := g.transformFunc(); c != nil && !g.v2 {
		f.Line()
		f.Add(c)
	}
	if g.usesNeg0 {
		f.Line()
		f.Comment("negZero is -0, which no Go constant can spell.")
		f.Var().Id("negZero").Op("=").Qual("math", "Copysign").Call(jen.Lit(0.0), jen.Lit(-1.0))
	}
	var buf bytes.Buffer
	if err := f.Render(&buf); err != nil {
		return nil, fmt.Errorf("BUG: golang: generated source does not format: %v", err)
	}
	return buf.Bytes(), nil
}

// header writes the generated-code line and the package doc comment:
//
//	// Code generated by sawmill 0.1.0; DO NOT EDIT.
//	// The generated code is yours: it carries no licence terms of sawmill's.
//
//	// Package model scores rows with a tree ensemble compiled by sawmill.
//	//
//	// Model sha256:… ; classification, 3 classes; 100 trees, 12345 nodes …
//	//
//	// Features (x[i] in Predict):
//	//
//	//	x[0]  "vibration_rms"
func (g *gen) header(f *jen.File) {
	p := g.p
	f.HeaderComment(g.generatedLine())
	f.HeaderComment(emit.Ownership)
	lines := []string{
		fmt.Sprintf("Package %s scores rows with a tree ensemble compiled by sawmill.", g.pkg),
		"",
		"Model sha256 " + emit.CommentSafe(p.Hash) + ".",
		fmt.Sprintf("It is a %s: %s, %s, depth up to %d, combined by %s%s; layout %s.",
			describeTask(p), plural(len(p.Trees), "tree"), plural(p.NumNodes(), "node"), p.MaxDepth(), p.Combine, describeTransform(p), g.layout),
		"",
		"Features (x[i] in Predict; NaN is a missing value):",
		"",
	}
	for i, ft := range p.Features {
		s := fmt.Sprintf("\tx[%d]  %s", i, strconv.Quote(ft.Name))
		if !ft.Used {
			s += "  (unused)"
		}
		lines = append(lines, s)
	}
	if p.IsClassifier() {
		lines = append(lines, "")
		if g.k == 1 {
			lines = append(lines, "Classes (Predict gives the probability of class 1):", "")
		} else {
			lines = append(lines, "Classes (Predict gives one output per class):", "")
		}
		for i, c := range p.Classes {
			lines = append(lines, fmt.Sprintf("\t%d  %s", i, strconv.Quote(c)))
		}
	}
	lines = append(lines, "")
	lines = append(lines, wrapLine(g.layoutNote(), 76)...)
	for _, l := range lines {
		f.PackageComment(l)
	}
}

// wrapLine breaks s at spaces into lines of at most width bytes (a longer
// word keeps a line of its own).
func wrapLine(s string, width int) []string {
	var out []string
	line := ""
	for _, w := range strings.Fields(s) {
		switch {
		case line == "":
			line = w
		case len(line)+1+len(w) > width:
			out = append(out, line)
			line = w
		default:
			line += " " + w
		}
	}
	return append(out, line)
}

// layoutNote says in the header how the code is laid out and how to get
// the other forms.
func (g *gen) layoutNote() string {
	switch {
	case g.layout == emit.Table && g.tables == TablesLiteral:
		return "Layout table: the nodes are array literals below, one line per node. " +
			"sawmill compile --layout nested writes if/else code instead; --tables base64 writes the table as a blob, which builds faster past some 50,000 nodes."
	case g.layout == emit.Table:
		return "Layout table: the nodes are a base64 blob that init decodes, which the Go compiler builds in seconds at any size. " +
			"sawmill compile --tables literal writes them as array literals a reviewer can read, one line per node; --layout nested writes if/else code."
	case g.layout == emit.Nested:
		return "Layout nested: one function of if/else per tree. " +
			"sawmill compile --layout table writes the nodes as a table walked by one loop, faster for forests of four trees or more."
	}
	return "Layout branchless: each tree a full heap walked without branches. " +
		"sawmill compile --layout nested or --layout table writes the other forms."
}

// generatedLine is the header line Go's convention for generated files asks
// for (a line matching ^// Code generated .* DO NOT EDIT\.$, see
// go.dev/s/generatedcode), which go vet and gofmt-aware tools honour; it
// also names sawmill, by which compile recognises its own files.
func (g *gen) generatedLine() string {
	return fmt.Sprintf("Code generated by sawmill %s; DO NOT EDIT.", emit.CommentSafe(emit.HeaderVersion(g.o.Version)))
}

func plural(n int, what string) string {
	if n == 1 {
		return "1 " + what
	}
	return fmt.Sprintf("%d %ss", n, what)
}

func describeTask(p *compile.Program) string {
	if p.IsClassifier() {
		return fmt.Sprintf("classifier of %d classes", len(p.Classes))
	}
	return "regression model"
}

func describeTransform(p *compile.Program) string {
	if p.Transform == forest.NoTransform || p.Transform == "" {
		return ""
	}
	return ", then " + string(p.Transform)
}

// constants declares the sizes:
//
//	const (
//		NumFeatures = 5
//		NumOutputs = 3
//	)
func (g *gen) constants() jen.Code {
	return jen.Const().Defs(
		jen.Comment("NumFeatures is the length of Predict's input."),
		jen.Id("NumFeatures").Op("=").Lit(len(g.p.Features)),
		jen.Comment("NumOutputs is the length of Predict's output."),
		jen.Id("NumOutputs").Op("=").Lit(g.k),
		jen.Comment("numTrees is the number of trees."),
		jen.Id("numTrees").Op("=").Lit(len(g.p.Trees)),
	)
}

// featureNames lists the inputs in order:
//
//	var FeatureNames = [NumFeatures]string{"vibration_rms", …}
func (g *gen) featureNames() jen.Code {
	names := make([]jen.Code, len(g.p.Features))
	for i, f := range g.p.Features {
		names[i] = jen.Lit(f.Name)
	}
	return jen.Comment("FeatureNames names each input of Predict, in order.").Line().
		Var().Id("FeatureNames").Op("=").Index(jen.Id("NumFeatures")).String().Values(wrap(names)...)
}

// classNames lists the class labels:
//
//	var ClassNames = [...]string{"healthy", …}
func (g *gen) classNames() jen.Code {
	names := make([]jen.Code, len(g.p.Classes))
	for i, c := range g.p.Classes {
		names[i] = jen.Lit(c)
	}
	return jen.Comment("ClassNames names the classes, in class index order.").Line().
		Var().Id("ClassNames").Op("=").Index(jen.Op("...")).String().Values(wrap(names)...)
}

// wrap puts each element of a long literal on its own line.
func wrap(items []jen.Code) []jen.Code {
	if len(items) <= 8 {
		return items
	}
	out := make([]jen.Code, 0, len(items)+1)
	for _, it := range items {
		out = append(out, jen.Line().Add(it))
	}
	return append(out, jen.Line())
}

// predict is the entry point. One output:
//
//	func Predict(x *[NumFeatures]float64) [NumOutputs]float64 {
//		s := 0.5         // base score (sum) or 0.0 (average)
//		s += tree0(x)
//		…
//		s = float64(s/numTrees) + base   // average only
//		return [NumOutputs]float64{sigmoid(s)}
//	}
//
// Several outputs: the trees give leaf indices into one table.
//
//	acc := baseScore   // or zero
//	addLeaf(&acc, tree0(x))
//	…
func (g *gen) predict() jen.Code {
	doc := jen.Comment("Predict scores one row: x holds one value per feature (see FeatureNames),").Line().
		Comment("NaN where a value is missing.")
	sig := jen.Func().Id("Predict").Params(jen.Id("x").Op("*").Index(jen.Id("NumFeatures")).Float64()).
		Index(jen.Id("NumOutputs")).Float64()
	var body []jen.Code
	switch g.layout {
	case emit.Nested:
		body = g.nestedPredictBody()
	case emit.Table:
		body = g.tablePredictBody()
	case emit.Branchless:
		body = g.branchlessPredictBody()
	}
	return doc.Line().Add(sig).Block(body...)
}

// scalarStart and scalarFinish frame the one-output Predict of every layout:
//
//	s := base (sum) or 0.0 (average)
//	… additions in tree order …
//	s = float64(s/numTrees) + base   // average (the conversion stops fusion)
//	return [NumOutputs]float64{transform(s)}
func (g *gen) scalarStart() jen.Code {
	start := 0.0
	if g.p.Combine == forest.Sum {
		start = g.p.BaseScore[0]
	}
	return jen.Id("s").Op(":=").Add(g.float(start))
}

func (g *gen) scalarFinish() []jen.Code {
	var out []jen.Code
	if g.p.Combine == forest.Average {
		// The conversion keeps the quotient, which the compiler makes a
		// product by 1/numTrees when that is exact, from fusing with the
		// addition (arm64 has a fused multiply-add; the Go spec allows
		// fusion unless an explicit conversion rounds).
		out = append(out, jen.Id("s").Op("=").Float64().Parens(jen.Id("s").Op("/").Id("numTrees")).Op("+").Add(g.float(g.p.BaseScore[0])))
	}
	res := jen.Code(jen.Id("s"))
	switch g.p.Transform {
	case forest.Logistic:
		res = jen.Id("sigmoid").Call(jen.Id("s"))
	case forest.Softmax:
		res = jen.Id("softmax1").Call(jen.Id("s"))
	}
	return append(out, jen.Return(jen.Index(jen.Id("NumOutputs")).Float64().Values(res)))
}

// vectorStart declares the accumulator:
//
//	acc := baseScore                 // sum
//	var acc [NumOutputs]float64      // average
func (g *gen) vectorStart() jen.Code {
	if g.p.Combine == forest.Sum {
		return jen.Id("acc").Op(":=").Id("baseScore")
	}
	return jen.Var().Id("acc").Index(jen.Id("NumOutputs")).Float64()
}

// vectorFinish divides (average), then applies the transform:
//
//	for j := range acc {
//		acc[j] = float64(acc[j]/numTrees) + baseScore[j]
//	}
//	softmax(&acc)
//	return acc
func (g *gen) vectorFinish() []jen.Code {
	var out []jen.Code
	if g.p.Combine == forest.Average {
		out = append(out, jen.For(jen.Id("j").Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("=").Float64().Parens(jen.Id("acc").Index(jen.Id("j")).Op("/").Id("numTrees")).
				Op("+").Id("baseScore").Index(jen.Id("j")),
		))
	}
	switch g.p.Transform {
	case forest.Logistic:
		out = append(out, jen.For(jen.Id("j").Op(",").Id("z").Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("=").Id("sigmoid").Call(jen.Id("z")),
		))
	case forest.Softmax:
		out = append(out, jen.Id("softmax").Call(jen.Op("&").Id("acc")))
	}
	return append(out, jen.Return(jen.Id("acc")))
}

// baseScoreVar is the base score vector for several outputs:
//
//	var baseScore = [NumOutputs]float64{0, 0, 0}
func (g *gen) baseScoreVar() jen.Code {
	vals := make([]jen.Code, g.k)
	for j, v := range g.p.BaseScore {
		vals[j] = g.float(v)
	}
	return jen.Comment("baseScore is added to the combined trees.").Line().
		Var().Id("baseScore").Op("=").Index(jen.Id("NumOutputs")).Float64().Values(vals...)
}

// predictClass picks the class. One logistic output:
//
//	func PredictClass(x *[NumFeatures]float64) int {
//		if Predict(x)[0] > 0.5 {
//			return 1
//		}
//		return 0
//	}
//
// Else the first index of the largest output.
func (g *gen) predictClass() jen.Code {
	sig := jen.Func().Id("PredictClass").Params(jen.Id("x").Op("*").Index(jen.Id("NumFeatures")).Float64()).Int()
	var body []jen.Code
	if g.k == 1 {
		body = []jen.Code{
			jen.If(jen.Id("Predict").Call(jen.Id("x")).Index(jen.Lit(0)).Op(">").Lit(0.5)).Block(jen.Return(jen.Lit(1))),
			jen.Return(jen.Lit(0)),
		}
	} else {
		body = []jen.Code{
			jen.Id("out").Op(":=").Id("Predict").Call(jen.Id("x")),
			jen.Id("best").Op(":=").Lit(0),
			jen.For(jen.Id("i").Op(":=").Lit(1), jen.Id("i").Op("<").Id("NumOutputs"), jen.Id("i").Op("++")).Block(
				jen.If(jen.Id("out").Index(jen.Id("i")).Op(">").Id("out").Index(jen.Id("best"))).Block(
					jen.Id("best").Op("=").Id("i"),
				),
			),
			jen.Return(jen.Id("best")),
		}
	}
	doc := jen.Comment("PredictClass is the index in ClassNames of the predicted class: ")
	if g.k == 1 {
		doc = jen.Comment("PredictClass is the index in ClassNames of the predicted class: 1 when the").Line().
			Comment("probability of class 1 is above 0.5, else 0.")
	} else {
		doc = jen.Comment("PredictClass is the index in ClassNames of the predicted class: the largest").Line().
			Comment("output, the lowest index on ties.")
	}
	return doc.Line().Add(sig).Block(body...)
}

// transformFunc declares the transform's helper, written with exactly the
// operations of forest.Sigmoid and forest.ApplyTransform:
//
//	func sigmoid(z float64) float64 {
//		if z >= 0 {
//			return 1 / (1 + math.Exp(-z))
//		}
//		e := math.Exp(z)
//		return e / (1 + e)
//	}
func (g *gen) transformFunc() jen.Code {
	switch g.p.Transform {
	case forest.Logistic:
		return g.sigmoidFunc()
	case forest.Softmax:
		if g.k == 1 {
			return jen.Comment("softmax1 is the softmax of one value: exp(z-z)/exp(z-z).").Line().
				Func().Id("softmax1").Params(jen.Id("z").Float64()).Float64().Block(
				jen.Id("e").Op(":=").Qual("math", "Exp").Call(jen.Id("z").Op("-").Id("z")),
				jen.Return(jen.Id("e").Op("/").Parens(jen.Lit(0.0).Op("+").Id("e"))),
			)
		}
		// func softmax(z *[NumOutputs]float64) {
		//	m := z[0] … max; e_i = exp(z_i-m); s = sum in order; z_i = e_i/s
		// }
		return jen.Comment("softmax turns z into probabilities: exp(z[i]-max) over their sum.").Line().
			Func().Id("softmax").Params(jen.Id("z").Op("*").Index(jen.Id("NumOutputs")).Float64()).Block(
			jen.Id("m").Op(":=").Id("z").Index(jen.Lit(0)),
			jen.For(jen.List(jen.Id("_"), jen.Id("v")).Op(":=").Range().Id("z").Index(jen.Lit(1), jen.Empty())).Block(
				jen.If(jen.Id("v").Op(">").Id("m")).Block(jen.Id("m").Op("=").Id("v")),
			),
			jen.Id("s").Op(":=").Lit(0.0),
			jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("z")).Block(
				jen.Id("z").Index(jen.Id("j")).Op("=").Qual("math", "Exp").Call(jen.Id("v").Op("-").Id("m")),
				jen.Id("s").Op("+=").Id("z").Index(jen.Id("j")),
			),
			jen.For(jen.Id("j").Op(":=").Range().Id("z")).Block(
				jen.Id("z").Index(jen.Id("j")).Op("/=").Id("s"),
			),
		)
	}
	return nil
}

// float is the one literal helper every float goes through. Shortest
// round-trip decimal; -0 (which a Go constant cannot spell) becomes negZero;
// NaN and ±Inf are never literals.
func (g *gen) float(v float64) jen.Code {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		panic(fmt.Sprintf("BUG: golang: literal %v is not finite", v))
	}
	if v == 0 && math.Signbit(v) {
		g.usesNeg0 = true
		return jen.Id("negZero")
	}
	return jen.Lit(v)
}

// threshold is a comparison's constant: -0 compares like +0, so it is
// written 0 and needs no variable.
func (g *gen) threshold(t float64) jen.Code {
	if t == 0 {
		return jen.Lit(0.0)
	}
	return g.float(t)
}
