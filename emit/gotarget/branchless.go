package gotarget

import (
	"github.com/dave/jennifer/jen"

	"github.com/sawmill-dev/sawmill/compile"
)

// The branchless layout stores each tree of depth d <= MaxBranchlessDepth
// as a full binary heap, padding shallow leaves down to depth d (a padded
// split tests anything and both its children hold the same leaf). The
// descent is exactly d steps with no data-dependent branch:
//
//	k = 2k + 1 + fail    fail = 0 when xx[hFeat[k]] <= hThr[k], else 1 (also for NaN)
//
// and the leaf is slot k - (2^d - 1). Splits use the same test as the table
// layout (see table.go): a split that sends missing values left swaps its
// children and tests -x. Deeper trees, which padding would blow up, stay in
// table form and are walked by the table's descent, in their place in tree
// order so that the additions are those of the interpreter.

// deepTree marks, in treeDepth, a tree kept in table form.
const deepTree = 255

// heapData is the forest in heap form.
type heapData struct {
	feat     []uint32  // splits of every heap tree, back to back
	thr      []float64 // their thresholds
	leaves   []float64 // leaf slots (NumOutputs values each), back to back
	depth    []uint32  // per tree: its depth, or deepTree
	off      []uint32  // per tree: first split, or table root for a deep tree
	leafOff  []uint32  // per tree: first leaf slot (heap trees)
	set      []uint32  // 1 + the set descriptor of each heap split, 0 for numeric ones
	featType string
	table    *tableData // the deep trees, nil when there are none
	negated  bool
	variants int      // blocks of xx, as tableData's
	sets     *setData // set descriptors, nil when there are none
	width    int
}

func buildHeap(p *compile.Program) *heapData {
	nf := len(p.Features)
	h := &heapData{negated: negates(p), variants: blocks(p), sets: buildSets(p, true)}
	h.width = h.variants * nf
	var deep []int
	slots := 0
	for ti := range p.Trees {
		t := &p.Trees[ti]
		d := t.Depth()
		if d > MaxBranchlessDepth {
			h.depth = append(h.depth, deepTree)
			h.off = append(h.off, 0) // set below from the table's roots
			h.leafOff = append(h.leafOff, 0)
			deep = append(deep, ti)
			continue
		}
		h.depth = append(h.depth, uint32(d))
		h.off = append(h.off, uint32(len(h.feat)))
		h.leafOff = append(h.leafOff, uint32(slots))
		splits := 1<<d - 1
		at := make([]int32, 2*splits+1) // heap position → node of t
		for pos := 0; pos < splits; pos++ {
			n := &t.Nodes[at[pos]]
			if n.IsLeaf() { // padding: both children are this leaf
				h.feat = append(h.feat, 0)
				h.thr = append(h.thr, 0)
				h.set = append(h.set, 0)
				at[2*pos+1], at[2*pos+2] = at[pos], at[pos]
				continue
			}
			f, th, first, second, set := testFor(n, nf, h.sets)
			h.feat = append(h.feat, uint32(f))
			h.thr = append(h.thr, th)
			h.set = append(h.set, uint32(set+1))
			at[2*pos+1], at[2*pos+2] = first, second
		}
		for pos := splits; pos < len(at); pos++ {
			n := &t.Nodes[at[pos]]
			if !n.IsLeaf() {
				panic("BUG: golang: a heap slot below the tree's depth is a split")
			}
			h.leaves = append(h.leaves, n.Value...)
			if len(n.Value) < p.NumOutputs { // a tree of one output: its value, then zeros
				h.leaves = append(h.leaves, make([]float64, p.NumOutputs-len(n.Value))...)
			}
			slots++
		}
	}
	if len(deep) > 0 {
		h.table = buildTable(p, deep)
		for i, ti := range deep {
			h.off[ti] = h.table.roots[i]
		}
	}
	h.featType = narrowest(uint64(h.width))
	return h
}

func (g *gen) heapData() *heapData {
	if g.heap == nil {
		g.heap = buildHeap(g.p)
	}
	return g.heap
}

// branchless declares the heap arrays, the descents and their decoding.
func (g *gen) branchless() []jen.Code {
	h := g.heapData()
	out := []jen.Code{
		jen.Comment("The forest as full binary heaps (see heapLeaf), decoded once by init from blob.").Line().
			Comment("A tree whose depth is deepTree is kept in table form (see leaf).").Line().
			Const().Id("deepTree").Op("=").Lit(deepTree),
		g.xxConsts(h.variants),
		g.heapLeafFunc(h),
	}
	sections := []section{
		{"hFeat", h.featType, len(h.feat), "index into xx tested at each heap split", func(bl *blob) {
			for _, f := range h.feat {
				bl.uint(h.featType, f)
			}
		}},
		{"hThr", "float64", len(h.thr), "threshold of each heap split", func(bl *blob) {
			for _, v := range h.thr {
				bl.float(v)
			}
		}},
		{"hLeaf", "float64", len(h.leaves), "leaf slots of the heaps, NumOutputs values each", func(bl *blob) {
			for _, v := range h.leaves {
				bl.float(v)
			}
		}},
		{"treeDepth", "uint8", len(h.depth), "depth of each tree, or deepTree", func(bl *blob) {
			for _, d := range h.depth {
				bl.uint("uint8", d)
			}
		}},
		{"treeOff", "uint32", len(h.off), "first heap split of each tree, or its root node in the table", func(bl *blob) {
			for _, o := range h.off {
				bl.uint("uint32", o)
			}
		}},
		{"leafOff", "uint32", len(h.leafOff), "first leaf slot of each heap tree", func(bl *blob) {
			for _, o := range h.leafOff {
				bl.uint("uint32", o)
			}
		}},
	}
	if h.sets != nil {
		typ := narrowest(uint64(len(h.sets.descs)))
		sections = append(sections, section{"hSet", typ, len(h.set), "1 + the set of a heap split that tests one, else 0", func(bl *blob) {
			for _, v := range h.set {
				bl.uint(typ, v)
			}
		}})
	}
	if h.table != nil {
		out = append(out, g.tableStep(h.table), g.tableLeaf())
		for _, sc := range g.tableSections(h.table) {
			if sc.name != "roots" {
				sections = append(sections, sc)
			}
		}
	}
	switch {
	case g.v2:
		out = append(out, g.v2Decls()...)
		if g.k > 1 && h.table != nil {
			out = append(out, g.addTableRow())
		}
	case g.k > 1:
		out = append(out, g.baseScoreVar(), g.addRow("hLeaf"))
		if h.table != nil {
			out = append(out, g.addTableRow())
		}
	}
	return append(out, g.blobDecls(sections)...)
}

// addTableRow is addLeaf for the table's leaf rows.
func (g *gen) addTableRow() jen.Code {
	return jen.Comment("addTableLeaf adds row r of the table's leafValues to acc.").Line().
		Func().Id("addTableLeaf").Params(jen.Id("acc").Op("*").Index(jen.Id("NumOutputs")).Add(g.accType()), jen.Id("r").Int()).Block(
		jen.Id("v").Op(":=").Id("leafValues").Index(jen.Id("r").Op("*").Id("NumOutputs").Op(":")).Index(jen.Op(":").Id("NumOutputs")),
		jen.For(jen.Id("j").Op(":=").Range().Id("acc")).Block(
			jen.Id("acc").Index(jen.Id("j")).Op("+=").Add(g.acc(jen.Id("v").Index(jen.Id("j")))),
		),
	)
}

// heapLeafFunc is the fixed-depth descent:
//
//	func heapLeaf(xx *[NumFeatures]float64, off, depth int) int {
//		n := 1<<depth - 1
//		feat, thr := hFeat[off:off+n], hThr[off:off+n]
//		k := 0
//		for range depth {
//			fail := 1
//			if xx[feat[k]] <= thr[k] {
//				fail = 0
//			}
//			k = 2*k + 1 + fail
//		}
//		return k - n
//	}
func (g *gen) heapLeafFunc(h *heapData) jen.Code {
	xxType := jen.Id("xxLen")
	return jen.Comment("heapLeaf walks the heap tree at off of the given depth and returns its leaf slot.").Line().
		Comment("Each step is computed from the test, never branched on (NaN fails every test).").Line().
		Func().Id("heapLeaf").Params(jen.Id("xx").Op("*").Index(xxType).Float64(), jen.List(jen.Id("off"), jen.Id("depth")).Int()).Int().Block(
		jen.Id("n").Op(":=").Lit(1).Op("<<").Id("depth").Op("-").Lit(1),
		jen.List(jen.Id("feat"), jen.Id("thr")).Op(":=").List(
			jen.Id("hFeat").Index(jen.Id("off").Op(":").Id("off").Op("+").Id("n")),
			jen.Id("hThr").Index(jen.Id("off").Op(":").Id("off").Op("+").Id("n"))),
		jen.Id("k").Op(":=").Lit(0),
		jen.For(jen.Id("l").Op(":=").Lit(0), jen.Id("l").Op("<").Id("depth"), jen.Id("l").Op("++")).Block(
			jen.Id("fail").Op(":=").Lit(1),
			g.heapTest(h),
			jen.Id("k").Op("=").Lit(2).Op("*").Id("k").Op("+").Lit(1).Op("+").Id("fail"),
		),
		jen.Return(jen.Id("k").Op("-").Id("n")),
	)
}

// heapTest sets fail to 0 when heap split k's test succeeds; with set
// splits, hSet says which test it is (see setTest).
func (g *gen) heapTest(h *heapData) jen.Code {
	test := jen.If(jen.Id("xx").Index(jen.Id("feat").Index(jen.Id("k"))).Op("<=").Id("thr").Index(jen.Id("k"))).Block(jen.Id("fail").Op("=").Lit(0))
	if h.sets == nil {
		return test
	}
	return jen.If(jen.Id("s").Op(":=").Id("hSet").Index(jen.Id("off").Op("+").Id("k")), jen.Id("s").Op("!=").Lit(0)).Block(
		jen.If(jen.Id("setTest").Call(jen.Int().Parens(jen.Id("s")).Op("-").Lit(1), jen.Id("xx").Index(jen.Id("feat").Index(jen.Id("k"))))).Block(
			jen.Id("fail").Op("=").Lit(0),
		),
	).Else().Add(test)
}

// branchlessPredictBody walks every tree in order:
//
//	for t, d := range treeDepth {
//		if d == deepTree {
//			s += thr[leaf(xx, int(treeOff[t]))]
//			continue
//		}
//		s += hLeaf[int(leafOff[t])+heapLeaf(xx, int(treeOff[t]), int(d))]
//	}
func (g *gen) branchlessPredictBody() []jen.Code {
	h := g.heapData()
	body := g.extendInput(h.variants)
	xx := jen.Op("&").Id("xx")
	slot := jen.Int().Parens(jen.Id("leafOff").Index(jen.Id("t"))).Op("+").
		Id("heapLeaf").Call(xx, jen.Int().Parens(jen.Id("treeOff").Index(jen.Id("t"))), jen.Int().Parens(jen.Id("d")))
	tableLeaf := jen.Id("leaf").Call(xx, jen.Int().Parens(jen.Id("treeOff").Index(jen.Id("t"))))
	var loop []jen.Code
	if g.v2 {
		if h.table != nil {
			leafV := jen.Id("thr").Index(tableLeaf)
			add := g.addV2(jen.Id("t"), -1, leafV)
			if g.k > 1 && g.perOut {
				add = jen.If(jen.Id("o").Op(":=").Id("treeOut").Index(jen.Id("t")), jen.Id("o").Op(">=").Lit(0)).Block(
					jen.Id("acc").Index(jen.Id("o")).Op("+=").Add(g.acc(leafV)),
				).Else().Block(jen.Id("addTableLeaf").Call(jen.Op("&").Id("acc"), jen.Int().Parens(leafV)))
			} else if g.k > 1 {
				add = jen.Id("addTableLeaf").Call(jen.Op("&").Id("acc"), jen.Int().Parens(leafV))
			}
			loop = append(loop, jen.If(jen.Id("d").Op("==").Id("deepTree")).Block(add, jen.Continue()))
		}
		switch {
		case g.k == 1:
			loop = append(loop, jen.Id("acc").Index(jen.Lit(0)).Op("+=").Add(g.acc(jen.Id("hLeaf").Index(slot))))
		case g.perOut:
			loop = append(loop,
				jen.Id("slot").Op(":=").Add(slot),
				jen.If(jen.Id("o").Op(":=").Id("treeOut").Index(jen.Id("t")), jen.Id("o").Op(">=").Lit(0)).Block(
					jen.Id("acc").Index(jen.Id("o")).Op("+=").Add(g.acc(jen.Id("hLeaf").Index(jen.Id("slot").Op("*").Id("NumOutputs")))),
				).Else().Block(jen.Id("addLeaf").Call(jen.Op("&").Id("acc"), jen.Id("slot"))))
		default:
			loop = append(loop, jen.Id("addLeaf").Call(jen.Op("&").Id("acc"), slot))
		}
		body = append(body, g.startV2(),
			jen.For(jen.List(jen.Id("t"), jen.Id("d")).Op(":=").Range().Id("treeDepth")).Block(loop...))
		return append(body, g.finishV2()...)
	}
	if g.k == 1 {
		if h.table != nil {
			loop = append(loop, jen.If(jen.Id("d").Op("==").Id("deepTree")).Block(
				jen.Id("s").Op("+=").Id("thr").Index(tableLeaf),
				jen.Continue(),
			))
		}
		loop = append(loop, jen.Id("s").Op("+=").Id("hLeaf").Index(slot))
		body = append(body, g.scalarStart(),
			jen.For(jen.List(jen.Id("t"), jen.Id("d")).Op(":=").Range().Id("treeDepth")).Block(loop...))
		return append(body, g.scalarFinish()...)
	}
	if h.table != nil {
		loop = append(loop, jen.If(jen.Id("d").Op("==").Id("deepTree")).Block(
			jen.Id("addTableLeaf").Call(jen.Op("&").Id("acc"), jen.Int().Parens(jen.Id("thr").Index(tableLeaf))),
			jen.Continue(),
		))
	}
	loop = append(loop, jen.Id("addLeaf").Call(jen.Op("&").Id("acc"), slot))
	body = append(body, g.vectorStart(),
		jen.For(jen.List(jen.Id("t"), jen.Id("d")).Op(":=").Range().Id("treeDepth")).Block(loop...))
	return append(body, g.vectorFinish()...)
}
