package gotarget

import (
	"fmt"
	"math"
	"strings"

	"github.com/dave/jennifer/jen"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// Format version 2 in the Go target. A program that uses none of it is
// emitted exactly as before; one that does (see usesV2) gets:
//
//   - the missing band: Predict first copies x, turning every value in the
//     band into NaN, so every split then routes it as missing;
//   - zero_missing splits: a second copy, xz, with the zero band turned
//     into NaN, which those splits test instead of x (in the table and
//     branchless layouts xz and -xz are two more blocks of xx);
//   - set splits: member(s, v), a range check then a bitset word or a
//     binary search of a sorted list, over tables built here (see setData);
//   - trees of one output: their leaves hold the value, added to that
//     output alone;
//   - float32 accumulation: the accumulator is a float32 array, each leaf
//     converted (exactly) before its float32 addition, the average, scale
//     and transform in float32 with expf, glibc's float32 exponential as
//     forest.Expf ports it, written into the file;
//   - the scale and the new transforms, with forest.Finish's operations.
//
// Go rounds every float32 operation to float32 and fuses only a*b+c, which
// no emitted expression has without an explicit conversion between (the
// Go spec: an explicit conversion rounds to the target type).

// usesV2 reports whether p needs any of the above.
func usesV2(p *compile.Program) bool {
	if p.Float32Accumulate() || p.Scale() != 1 || p.HasMissingValue {
		return true
	}
	switch p.Transform {
	case forest.Exp, forest.LogisticEach, forest.Normalize:
		return true
	}
	for ti := range p.Trees {
		t := &p.Trees[ti]
		if t.HasOutput && p.NumOutputs > 1 {
			return true
		}
		for i := range t.Nodes {
			if t.Nodes[i].ZeroMissing || t.Nodes[i].IsSetSplit() {
				return true
			}
		}
	}
	return false
}

// zeroMissing reports whether some split of p has ZeroMissing.
func zeroMissing(p *compile.Program) bool {
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			if p.Trees[ti].Nodes[i].ZeroMissing {
				return true
			}
		}
	}
	return false
}

// perOutput reports whether some tree adds to one output of several.
func perOutput(p *compile.Program) bool {
	if p.NumOutputs == 1 {
		return false
	}
	for ti := range p.Trees {
		if p.Trees[ti].HasOutput {
			return true
		}
	}
	return false
}

// accType is the accumulator's element type.
func (g *gen) accType() *jen.Statement {
	if g.p.Float32Accumulate() {
		return jen.Float32()
	}
	return jen.Float64()
}

// acc converts a float64 leaf value to the accumulator's type (exact: under
// float32 accumulation every leaf is a float32 value).
func (g *gen) acc(v jen.Code) jen.Code {
	if g.p.Float32Accumulate() {
		return jen.Float32().Parens(v)
	}
	return v
}

// Set membership. Each distinct (categories, negated) pair gets a
// descriptor: the bounds of MemberRange, the first category, and either a
// bitset (one bit per category from the first to the last, in uint64
// words) or the sorted list, searched by halves. BenchmarkSetMembership
// (go test ./emit/gotarget -run '^$' -bench SetMembership -benchtime 1x, on
// the shared two-core machine) measured a range check and a bitset word at
// 5 to 12 ns a test for 3 to 1,000 categories, the binary search at 26 to
// 137 ns and a Go switch at 6 to 80 ns; so the bitset is used whenever it
// is no more than four words per category (8 times the list's memory at
// worst) or four words in all, and the list only for sets spread thin over
// [0, 2^31), which stay as small as their lists. (Nested code could use a
// switch for those, about 1.7 times faster than the search; not done.)
type setData struct {
	descs []setDesc
	index map[string]int
	words []uint64
	list  []int32
}

type setDesc struct {
	lo, hi              float64
	loOpen, isList, neg bool
	base                int32
	off, n              int
}

// Flag bits of setKind in the emitted file.
const (
	setListFlag   = 1
	setNegFlag    = 2
	setLoOpenFlag = 4
)

// bitsetWords is the number of uint64 words a bitset of cats takes.
func bitsetWords(cats []int32) int { return int(cats[len(cats)-1]-cats[0])/64 + 1 }

// useBitset is the choice between the two representations.
func useBitset(cats []int32) bool {
	w := bitsetWords(cats)
	return w <= 4 || w <= 4*len(cats)
}

// buildSets gives every set split of p its descriptor, in tree and node
// order, so that every layout numbers them alike. For the table layouts
// (tables) a split that sends missing values left gets the negated test.
// It is nil when p has no set split.
func buildSets(p *compile.Program, tables bool) *setData {
	var s *setData
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			n := &p.Trees[ti].Nodes[i]
			if !n.IsSetSplit() {
				continue
			}
			if s == nil {
				s = &setData{index: map[string]int{}}
			}
			s.add(p.CategoryMatch, n.Categories, tables && n.MissingLeft)
		}
	}
	return s
}

func setKey(cats []int32, neg bool) string { return fmt.Sprint(neg, cats) }

// lookup is the descriptor of n's categories.
func (s *setData) lookup(n *compile.Node, neg bool) int {
	i, ok := s.index[setKey(n.Categories, neg)]
	if !ok {
		panic("BUG: golang: a set split without a descriptor")
	}
	return i
}

func (s *setData) add(m forest.CategoryMatch, cats []int32, neg bool) {
	key := setKey(cats, neg)
	if _, ok := s.index[key]; ok {
		return
	}
	d := setDesc{neg: neg}
	if lo, loOpen, hi, ok := compile.MemberRange(m, cats); ok {
		d.lo, d.loOpen, d.hi, d.base = lo, loOpen, hi, cats[0]
		if useBitset(cats) {
			d.off, d.n = len(s.words), bitsetWords(cats)
			s.words = append(s.words, make([]uint64, d.n)...)
			for _, c := range cats {
				k := c - d.base
				s.words[d.off+int(k>>6)] |= 1 << (k & 63)
			}
		} else {
			d.isList, d.off, d.n = true, len(s.list), len(cats)
			s.list = append(s.list, cats...)
		}
	} else {
		d.isList = true // an empty range: nothing is a member
	}
	s.index[key] = len(s.descs)
	s.descs = append(s.descs, d)
}

// setDecls declares the descriptor tables and member:
//
//	var (
//		setLo   = [...]float64{…}   // members v have setLo[s] <= v (<, with loOpen)
//		setHi   = [...]float64{…}   // and v < setHi[s]
//		setBase = [...]int32{…}     // first category
//		setKind = [...]uint8{…}     // list, negated, loOpen bits
//		setOff, setN = …            // words or list entries
//		setWords = [...]uint64{…}
//		setList = [...]int32{…}
//	)
//
//	func member(s int, v float64) bool {
//		if !(v >= setLo[s] && v < setHi[s]) || v == setLo[s] && setKind[s]&setLoOpen != 0 {
//			return false
//		}
//		c := int32(v)
//		…
//	}
func (g *gen) setDecls() []jen.Code {
	s := g.sets
	if s == nil {
		return nil
	}
	var lo, hi, base, kind, off, cnt, words, list []jen.Code
	for _, d := range s.descs {
		lo = append(lo, g.threshold(d.lo))
		hi = append(hi, g.threshold(d.hi))
		base = append(base, jen.Lit(int(d.base)))
		k := 0
		if d.isList {
			k |= setListFlag
		}
		if d.neg {
			k |= setNegFlag
		}
		if d.loOpen {
			k |= setLoOpenFlag
		}
		kind = append(kind, jen.Lit(k))
		off = append(off, jen.Lit(d.off))
		cnt = append(cnt, jen.Lit(d.n))
	}
	for _, w := range s.words {
		words = append(words, jen.Op(fmt.Sprintf("%#x", w)))
	}
	for _, c := range s.list {
		list = append(list, jen.Lit(int(c)))
	}
	arr := func(name, typ, doc string, items []jen.Code) jen.Code {
		if len(items) == 0 {
			return jen.Comment(doc).Line().Var().Id(name).Index().Id(typ)
		}
		return jen.Comment(doc).Line().Var().Id(name).Op("=").Index(jen.Op("...")).Id(typ).Values(wrap(items)...)
	}
	v := jen.Id("v")
	rangeTest := jen.Op("!").Parens(v.Clone().Op(">=").Id("setLo").Index(jen.Id("s")).Op("&&").Add(v.Clone()).Op("<").Id("setHi").Index(jen.Id("s"))).
		Op("||").Add(v.Clone()).Op("==").Id("setLo").Index(jen.Id("s")).Op("&&").Id("setKind").Index(jen.Id("s")).Op("&").Id("setIsLoOpen").Op("!=").Lit(0)
	var body []jen.Code
	if g.p.CategoryRound32 {
		body = append(body, jen.Id("v").Op("=").Float64().Parens(jen.Float32().Parens(jen.Id("v"))).
			Comment("set splits take the category of the input rounded to float32"))
	}
	body = append(body,
		jen.If(rangeTest).Block(jen.Return(jen.False())),
		jen.Id("c").Op(":=").Int32().Parens(jen.Id("v")).Comment("inside the range the category is v truncated"),
	)
	if g.p.CategoryMatch == forest.MatchExact {
		body = append(body, jen.If(jen.Float64().Parens(jen.Id("c")).Op("!=").Id("v")).Block(jen.Return(jen.False())))
	}
	body = append(body,
		jen.Id("off").Op(":=").Int().Parens(jen.Id("setOff").Index(jen.Id("s"))),
		jen.If(jen.Id("setKind").Index(jen.Id("s")).Op("&").Id("setIsList").Op("!=").Lit(0)).Block(
			jen.Id("l").Op(":=").Id("setList").Index(jen.Id("off").Op(":").Id("off").Op("+").Int().Parens(jen.Id("setN").Index(jen.Id("s")))),
			jen.List(jen.Id("i"), jen.Id("j")).Op(":=").List(jen.Lit(0), jen.Len(jen.Id("l"))),
			jen.For(jen.Id("i").Op("<").Id("j")).Block(
				jen.Id("m").Op(":=").Int().Parens(jen.Uint().Parens(jen.Id("i").Op("+").Id("j")).Op(">>").Lit(1)),
				jen.If(jen.Id("l").Index(jen.Id("m")).Op("<").Id("c")).Block(
					jen.Id("i").Op("=").Id("m").Op("+").Lit(1),
				).Else().Block(jen.Id("j").Op("=").Id("m")),
			),
			jen.Return(jen.Id("i").Op("<").Len(jen.Id("l")).Op("&&").Id("l").Index(jen.Id("i")).Op("==").Id("c")),
		),
		jen.Id("k").Op(":=").Uint32().Parens(jen.Id("c").Op("-").Id("setBase").Index(jen.Id("s"))),
		jen.Return(jen.Id("setWords").Index(jen.Id("off").Op("+").Int().Parens(jen.Id("k").Op(">>").Lit(6))).
			Op(">>").Parens(jen.Id("k").Op("&").Lit(63)).Op("&").Lit(1).Op("!=").Lit(0)),
	)
	out := []jen.Code{
		jen.Comment("Flags of setKind.").Line().Const().Defs(
			jen.Id("setIsList").Op("=").Lit(setListFlag).Comment("the set is a sorted list in setList, else a bitset in setWords"),
			jen.Id("setIsNeg").Op("=").Lit(setNegFlag).Comment("setTest succeeds on non-missing non-members"),
			jen.Id("setIsLoOpen").Op("=").Lit(setLoOpenFlag).Comment("setLo itself is no member"),
		),
		arr("setLo", "float64", "setLo and setHi bound each set's members: setLo[s] <= v < setHi[s].", lo),
		arr("setHi", "float64", "setHi is one past each set's last category.", hi),
		arr("setBase", "int32", "setBase is each set's first category, bit 0 of its bitset.", base),
		arr("setKind", "uint8", "setKind holds each set's flags.", kind),
		arr("setOff", "int32", "setOff is where each set starts in setWords or setList.", off),
		arr("setN", "int32", "setN is the length of each set in setWords or setList.", cnt),
		arr("setWords", "uint64", "setWords holds the bitsets, bit k of a set for category setBase+k.", words),
		arr("setList", "int32", "setList holds the sorted lists.", list),
		jen.Comment("member reports whether v, not missing, is a member of set s under the model's").Line().
			Comment(fmt.Sprintf("category rule (%s).", categoryRule(g.p))).Line().
			Func().Id("member").Params(jen.Id("s").Int(), jen.Id("v").Float64()).Bool().Block(body...),
	}
	if g.layout != "nested" {
		out = append(out, jen.Comment("setTest is the test of a set split in the tables: membership, or for a split").Line().
			Comment("that sends missing values left, a value that is neither missing nor a member.").Line().
			Func().Id("setTest").Params(jen.Id("s").Int(), jen.Id("v").Float64()).Bool().Block(
			jen.If(jen.Id("setKind").Index(jen.Id("s")).Op("&").Id("setIsNeg").Op("!=").Lit(0)).Block(
				jen.Return(jen.Id("v").Op("==").Id("v").Op("&&").Op("!").Id("member").Call(jen.Id("s"), jen.Id("v"))),
			),
			jen.Return(jen.Id("member").Call(jen.Id("s"), jen.Id("v"))),
		))
	}
	return out
}

func categoryRule(p *compile.Program) string {
	switch p.CategoryMatch {
	case forest.MatchTruncate:
		return "truncate: v > -1 and v truncated toward zero listed"
	case forest.MatchExact:
		return "exact: v an integer and listed"
	}
	return "floor: v >= 0 and its floor listed"
}

// inputPrep starts Predict: the missing band turned into NaN, and for the
// nested layout the zero band copy xz.
//
//	xm := *x
//	for j, v := range xm {
//		if v >= -999.00000762939453 && v <= -998.9999923706055 {
//			xm[j] = math.NaN()
//		}
//	}
//	x = &xm
func (g *gen) inputPrep(nested bool) []jen.Code {
	var out []jen.Code
	p := g.p
	if p.HasMissingValue {
		out = append(out,
			jen.Id("xm").Op(":=").Op("*").Id("x").Comment("values in the missing band count as missing: NaN"),
			jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("xm")).Block(
				jen.If(jen.Id("v").Op(">=").Add(g.threshold(p.MissingLo)).Op("&&").Id("v").Op("<=").Add(g.threshold(p.MissingHi))).Block(
					jen.Id("xm").Index(jen.Id("j")).Op("=").Qual("math", "NaN").Call(),
				),
			),
			jen.Id("x").Op("=").Op("&").Id("xm"),
		)
	}
	if nested && g.zero {
		out = append(out,
			jen.Id("xz").Op(":=").Op("*").Id("x").Comment("what zero_missing splits test: the zero band is missing too"),
			jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("xz")).Block(
				jen.If(g.inZeroBand(jen.Id("v"))).Block(
					jen.Id("xz").Index(jen.Id("j")).Op("=").Qual("math", "NaN").Call(),
				),
			),
		)
	}
	return out
}

// inZeroBand is -Z <= v && v <= Z.
func (g *gen) inZeroBand(v jen.Code) jen.Code {
	z := g.p.ZeroBound
	return jen.Add(v).Op(">=").Add(g.threshold(-z)).Op("&&").Add(v).Op("<=").Add(g.threshold(z))
}

// accLit is a constant of the accumulator's type: under float32
// accumulation a float32 value, which may be an infinity (a base score
// beyond float32's range rounds to one) or -0.
func (g *gen) accLit(v float64) jen.Code {
	switch {
	case !g.p.Float32Accumulate():
		return g.float(v)
	case math.IsInf(v, 0):
		return jen.Float32().Parens(jen.Qual("math", "Inf").Call(jen.Lit(int(math.Copysign(1, v)))))
	case v == 0 && math.Signbit(v):
		return jen.Float32().Parens(g.float(v))
	}
	return g.float(v)
}

// baseScoreV2 declares the base score in the accumulator's type.
func (g *gen) baseScoreV2() jen.Code {
	vals := make([]jen.Code, g.k)
	for j, v := range g.p.BaseScore {
		vals[j] = g.accLit(v)
	}
	return jen.Comment("baseScore is where a sum starts, or what is added after an average.").Line().
		Var().Id("baseScore").Op("=").Index(jen.Id("NumOutputs")).Add(g.accType()).Values(vals...)
}

// v2Decls declares what the v2 Predict uses: base score, tree outputs,
// divisors, scale, the transform helpers and expf.
func (g *gen) v2Decls() []jen.Code {
	p := g.p
	out := []jen.Code{g.baseScoreV2()}
	if g.perOut {
		outs := make([]jen.Code, len(p.Trees))
		for ti := range p.Trees {
			o := -1
			if p.Trees[ti].HasOutput {
				o = p.Trees[ti].Output
			}
			outs[ti] = jen.Lit(o)
		}
		out = append(out, jen.Comment("treeOut is the output each tree adds to, or -1 for all of them.").Line().
			Var().Id("treeOut").Op("=").Index(jen.Id("numTrees")).Int().Values(wrap(outs)...))
		if p.Combine == forest.Average {
			divs := make([]jen.Code, g.k)
			for j := range divs {
				divs[j] = jen.Lit(p.TreesAddingTo(j))
			}
			out = append(out, jen.Comment("divisor is the number of trees that add to each output.").Line().
				Var().Id("divisor").Op("=").Index(jen.Id("NumOutputs")).Add(g.accType()).Values(divs...))
		}
	}
	if s := p.Scale(); s != 1 {
		out = append(out, jen.Comment("transformScale multiplies the joined score before the transform.").Line().
			Var().Id("transformScale").Op("=").Add(g.float(s)))
	}
	out = append(out, g.transformV2()...)
	sharedTrees := false // some tree adds to every output
	for ti := range p.Trees {
		sharedTrees = sharedTrees || !p.Trees[ti].HasOutput
	}
	if g.k > 1 && (sharedTrees || g.layout != "nested") {
		body := []jen.Code{jen.Id("v").Op(":=").Id("leafValues").Index(jen.Id("r").Op("*").Id("NumOutputs").Op(":")).Index(jen.Op(":").Id("NumOutputs"))}
		if g.layout == "nested" {
			body = []jen.Code{jen.Id("v").Op(":=").Op("&").Id("leafValues").Index(jen.Id("r"))}
		}
		if g.layout == "branchless" {
			body = []jen.Code{jen.Id("v").Op(":=").Id("hLeaf").Index(jen.Id("r").Op("*").Id("NumOutputs").Op(":")).Index(jen.Op(":").Id("NumOutputs"))}
		}
		body = append(body, jen.For(jen.Id("j").Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("+=").Add(g.acc(jen.Id("v").Index(jen.Id("j")))),
		))
		out = append(out, jen.Comment("addLeaf adds leaf row r to acc, output by output.").Line().
			Func().Id("addLeaf").Params(jen.Id("acc").Op("*").Index(jen.Id("NumOutputs")).Add(g.accType()), jen.Id("r").Int()).Block(body...))
	}
	return out
}

// addTree adds tree t's leaf to acc: leaf is the leaf's value for a tree
// of one output or when the model has one output, else its row.
//
//	acc[2] += float32(tree5(x))     // nested, a tree of output 2
//	addTree(&acc, t, thr[a])        // tables: treeOut[t] decides
func (g *gen) addTreeFunc() jen.Code {
	return jen.Comment("addTree adds the leaf tree t reached: its value to output treeOut[t], or, for a").Line().
		Comment("tree of every output, the leaf row v points to.").Line().
		Func().Id("addTree").Params(jen.Id("acc").Op("*").Index(jen.Id("NumOutputs")).Add(g.accType()), jen.Id("t").Int(), jen.Id("v").Float64()).Block(
		jen.If(jen.Id("o").Op(":=").Id("treeOut").Index(jen.Id("t")), jen.Id("o").Op(">=").Lit(0)).Block(
			jen.Id("acc").Index(jen.Id("o")).Op("+=").Add(g.acc(jen.Id("v"))),
			jen.Return(),
		),
		jen.Id("addLeaf").Call(jen.Id("acc"), jen.Int().Parens(jen.Id("v"))),
	)
}

// startV2 declares the accumulator:
//
//	acc := baseScore                   // sum
//	var acc [NumOutputs]float32        // average
func (g *gen) startV2() jen.Code {
	if g.p.Combine == forest.Sum {
		return jen.Id("acc").Op(":=").Id("baseScore")
	}
	return jen.Var().Id("acc").Index(jen.Id("NumOutputs")).Add(g.accType())
}

// addV2 adds one tree's leaf: tree index ti (a constant) or the expression
// t, and v its leaf's table entry or the tree function's result.
func (g *gen) addV2(t jen.Code, treeConst int, v jen.Code) jen.Code {
	switch {
	case g.k == 1:
		return jen.Id("acc").Index(jen.Lit(0)).Op("+=").Add(g.acc(v))
	case treeConst >= 0 && g.p.Trees[treeConst].HasOutput:
		return jen.Id("acc").Index(jen.Lit(g.p.Trees[treeConst].Output)).Op("+=").Add(g.acc(v))
	case treeConst >= 0 || !g.perOut:
		return jen.Id("addLeaf").Call(jen.Op("&").Id("acc"), jen.Int().Parens(v))
	}
	return jen.Id("addTree").Call(jen.Op("&").Id("acc"), t, v)
}

// finishV2 divides (average), scales, transforms and returns float64s:
//
//	for j := range acc {
//		acc[j] = float64(acc[j]/numTrees) + baseScore[j] // float32 under float32 accumulation
//	}
//	for j, v := range acc {
//		acc[j] = float32(v * float32(transformScale))
//	}
//	softmax(&acc)
//	var out [NumOutputs]float64
//	for j, v := range acc {
//		out[j] = float64(v)
//	}
//	return out
func (g *gen) finishV2() []jen.Code {
	p := g.p
	var out []jen.Code
	if p.Combine == forest.Average {
		div := jen.Id("numTrees")
		if g.perOut {
			div = jen.Id("divisor").Index(jen.Id("j"))
		}
		out = append(out, jen.For(jen.Id("j").Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("=").Add(g.accType()).Parens(jen.Id("acc").Index(jen.Id("j")).Op("/").Add(div)).
				Op("+").Id("baseScore").Index(jen.Id("j")).
				Comment("the conversion keeps the quotient from fusing with the addition"),
		))
	}
	if p.Scale() != 1 {
		s := jen.Id("transformScale")
		if p.Float32Accumulate() {
			s = jen.Float32().Parens(jen.Id("transformScale"))
		}
		out = append(out, jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("=").Add(g.accType()).Parens(jen.Id("v").Op("*").Add(s)).
				Comment("the conversion keeps the product from fusing with a later addition"),
		))
	}
	switch p.Transform {
	case forest.Logistic, forest.LogisticEach, forest.Exp:
		fn := "sigmoid"
		if p.Transform == forest.Exp {
			fn = "expT"
		}
		if p.Float32Accumulate() {
			fn += "32"
		}
		out = append(out, jen.For(jen.List(jen.Id("j"), jen.Id("z")).Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("=").Id(fn).Call(jen.Id("z")),
		))
	case forest.Softmax, forest.Normalize:
		out = append(out, jen.Id(string(p.Transform)).Call(jen.Op("&").Id("acc")))
	}
	if !p.Float32Accumulate() {
		return append(out, jen.Return(jen.Id("acc")))
	}
	return append(out,
		jen.Var().Id("out").Index(jen.Id("NumOutputs")).Float64(),
		jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("acc")).Block(
			jen.Id("out").Index(jen.Id("j")).Op("=").Float64().Parens(jen.Id("v")),
		),
		jen.Return(jen.Id("out")),
	)
}

// transformV2 declares the transform's helpers, with the operations of
// forest.ApplyTransform (float64) or forest.ApplyTransform32 (float32).
func (g *gen) transformV2() []jen.Code {
	p := g.p
	f32 := p.Float32Accumulate()
	T := g.accType
	var out []jen.Code
	expf := func(v jen.Code) jen.Code {
		if f32 {
			return jen.Id("expf").Call(v)
		}
		return jen.Qual("math", "Exp").Call(v)
	}
	switch p.Transform {
	case forest.Logistic, forest.LogisticEach:
		if f32 {
			out = append(out, jen.Comment("sigmoid32 is the logistic function in float32: 1/(1+expf(-z)).").Line().
				Func().Id("sigmoid32").Params(jen.Id("z").Float32()).Float32().Block(
				jen.Id("d").Op(":=").Lit(1).Op("+").Id("expf").Call(jen.Op("-").Id("z")),
				jen.Return(jen.Lit(1).Op("/").Id("d")),
			))
		} else {
			out = append(out, g.sigmoidFunc())
		}
	case forest.Exp:
		if f32 {
			out = append(out, jen.Comment("expT32 is the exp transform: expf.").Line().
				Func().Id("expT32").Params(jen.Id("z").Float32()).Float32().Block(jen.Return(jen.Id("expf").Call(jen.Id("z")))))
		} else {
			out = append(out, jen.Comment("expT is the exp transform.").Line().
				Func().Id("expT").Params(jen.Id("z").Float64()).Float64().Block(jen.Return(jen.Qual("math", "Exp").Call(jen.Id("z")))))
		}
	case forest.Softmax:
		// the sum of the exponentials is float64 in both precisions
		sum := jen.Id("s").Op("+=").Id("z").Index(jen.Id("j"))
		div := jen.Id("z").Index(jen.Id("j")).Op("/=").Id("s")
		var pre []jen.Code
		if f32 {
			sum = jen.Id("s").Op("+=").Float64().Parens(jen.Id("z").Index(jen.Id("j")))
			pre = []jen.Code{jen.Id("s32").Op(":=").Float32().Parens(jen.Id("s"))}
			div = jen.Id("z").Index(jen.Id("j")).Op("/=").Id("s32")
		}
		body := []jen.Code{
			jen.Id("m").Op(":=").Id("z").Index(jen.Lit(0)),
			jen.For(jen.List(jen.Id("_"), jen.Id("v")).Op(":=").Range().Id("z").Index(jen.Lit(1), jen.Empty())).Block(
				jen.If(jen.Id("v").Op(">").Id("m")).Block(jen.Id("m").Op("=").Id("v")),
			),
			jen.Id("s").Op(":=").Lit(0.0),
			jen.For(jen.List(jen.Id("j"), jen.Id("v")).Op(":=").Range().Id("z")).Block(
				jen.Id("z").Index(jen.Id("j")).Op("=").Add(expf(jen.Id("v").Op("-").Id("m"))),
				sum,
			),
		}
		body = append(body, pre...)
		body = append(body, jen.For(jen.Id("j").Op(":=").Range().Id("z")).Block(div))
		out = append(out, jen.Comment("softmax turns z into probabilities: exp(z[i]-max) over their sum, summed in float64.").Line().
			Func().Id("softmax").Params(jen.Id("z").Op("*").Index(jen.Id("NumOutputs")).Add(T())).Block(body...))
	case forest.Normalize:
		out = append(out, jen.Comment("normalize divides each output by the sum of all, summed in order; a zero sum gives zeros.").Line().
			Func().Id("normalize").Params(jen.Id("z").Op("*").Index(jen.Id("NumOutputs")).Add(T())).Block(
			jen.Var().Id("s").Add(T()),
			jen.For(jen.List(jen.Id("_"), jen.Id("v")).Op(":=").Range().Id("z")).Block(jen.Id("s").Op("+=").Id("v")),
			jen.For(jen.Id("j").Op(":=").Range().Id("z")).Block(
				jen.If(jen.Id("s").Op("==").Lit(0)).Block(
					jen.Id("z").Index(jen.Id("j")).Op("=").Lit(0),
				).Else().Block(
					jen.Id("z").Index(jen.Id("j")).Op("/=").Id("s"),
				),
			),
		))
	}
	if f32 {
		switch p.Transform {
		case forest.Logistic, forest.LogisticEach, forest.Exp, forest.Softmax:
			out = append(out, expfDecl())
		}
	}
	return out
}

// sigmoidFunc is forest.Sigmoid.
func (g *gen) sigmoidFunc() jen.Code {
	return jen.Comment("sigmoid is the logistic function in the form that never overflows.").Line().
		Func().Id("sigmoid").Params(jen.Id("z").Float64()).Float64().Block(
		jen.If(jen.Id("z").Op(">=").Lit(0)).Block(
			jen.Return(jen.Lit(1).Op("/").Parens(jen.Lit(1).Op("+").Qual("math", "Exp").Call(jen.Op("-").Id("z")))),
		),
		jen.Id("e").Op(":=").Qual("math", "Exp").Call(jen.Id("z")),
		jen.Return(jen.Id("e").Op("/").Parens(jen.Lit(1).Op("+").Id("e"))),
	)
}

// expfDecl writes forest.Expf out: the same operations, fused exactly where
// it fuses (math.FMA), with its constants.
func expfDecl() jen.Code {
	tab, inv, c0, c1, c2, shift := forest.ExpfData()
	var b strings.Builder
	b.WriteString(`// expf is e^x in float32, bit for bit the C library's expf as glibc 2.36
// computes it on x86-64 with FMA: x·32/ln 2 = k + r, 2^(k/32) from a table,
// 2^(r/32) from a cubic in float64, every fused multiply-add explicit.
func expf(x float32) float32 {
	bits := math.Float32bits(x)
	abstop := bits >> 20 & 0x7ff
	if abstop >= 0x42b {
		switch {
		case bits == 0xff800000:
			return 0
		case abstop >= 0x7f8:
			return x + x
		case x > 0x1.62e42ep6:
			return float32(math.Inf(1))
		case x < -0x1.9fe368p6:
			return 0
		case x < -0x1.9d1d9ep6:
			return 0x1p-149
		}
	}
	xd := float64(x)
	kd := math.FMA(expfInvLn2N, xd, expfShift)
	ki := math.Float64bits(kd)
	kd -= expfShift
	r := math.FMA(expfInvLn2N, xd, -kd)
	s := math.Float64frombits(expfTab[ki%32] + ki<<47)
	z := math.FMA(expfC0, r, expfC1)
	r2 := float64(r * r)
	y := math.FMA(r, expfC2, 1)
	y = math.FMA(z, r2, y)
	return float32(y * s)
}

var expfTab = [32]uint64{
`)
	for i := 0; i < 32; i += 4 {
		fmt.Fprintf(&b, "\t%#016x, %#016x, %#016x, %#016x,\n", tab[i], tab[i+1], tab[i+2], tab[i+3])
	}
	b.WriteString("}")
	var defs []jen.Code
	for _, c := range []struct {
		name string
		v    uint64
	}{{"expfInvLn2N", inv}, {"expfC0", c0}, {"expfC1", c1}, {"expfC2", c2}, {"expfShift", shift}} {
		defs = append(defs, jen.Id(c.name).Op("=").Qual("math", "Float64frombits").Call(jen.Op(fmt.Sprintf("%#016x", c.v))))
	}
	return jen.Op(b.String()).Line().Line().Comment("The constants of expf, from their float64 bits.").Line().Var().Defs(defs...)
}
