package gotarget

import (
	"github.com/dave/jennifer/jen"

	"github.com/sawmill-dev/sawmill/forest"
)

// The table layout's batch walk (format 1 programs): PredictBatch scores
// blocks of rows tree group by tree group, so that the nodes of one group
// of trees (see lanes) serve every row of the block while they are in the
// cache, instead of every row walking the whole forest. Each row still adds
// its leaves in tree order from the same start and finishes with the same
// operations as Predict, so every output is Predict's, bit for bit.

// blockBytes bounds the extended inputs of one block, so that they stay in
// the first-level cache beside the nodes.
const blockBytes = 32 << 10

// maxBlockRows is the most rows in one block; 64 measured best among 16,
// 64 and 256 on 125 depth-8 trees (BenchmarkLayouts' forests).
const maxBlockRows = 64

// bigForestBytes is the size of tables beyond which a forest is read from
// memory rather than the caches (a last-level cache share of a server core
// is 2 to 8 MiB in common practice; this machine's AMD EPYC has 32 MiB per
// eight cores). Every block of rows reads the whole forest once, so such a
// forest takes blocks of bigBlockBytes of rows, which the second-level
// cache holds beside one group of trees, and is read from memory a
// sixteenth as often as with maxBlockRows. Measured with bench/libs at
// 10,000 rows, one thread: the 1,000-tree fully grown forest (4.2M nodes,
// about 67 MB) went from 622 to 114 µs a row; forests that the last-level
// cache holds showed no steady difference (BenchmarkLayouts' table against
// table64: 24 fully grown trees, 1.3 MB, medians 1,260 and 1,355 ns a row;
// 48 trees, 2.6 MB, 4,123 and 3,654; best 2,347 and 2,844).
const bigForestBytes = 8 << 20

// bigBlockBytes bounds the extended inputs of one block of a forest of
// more than bigForestBytes, and bigBlockRows its rows.
const (
	bigBlockBytes = 256 << 10
	bigBlockRows  = 1024
)

// blockRows is the number of rows one block holds: as many as fit
// blockBytes, between 4 and maxBlockRows; for a forest of more than
// bigForestBytes, as many as fit bigBlockBytes, up to bigBlockRows.
func (g *gen) blockRows(d *tableData) int {
	if g.o.blockRows != 0 {
		return g.o.blockRows
	}
	row := 8 * (d.width + 1)
	if d.tableBytes() > bigForestBytes {
		return max(maxBlockRows, min(bigBlockRows, bigBlockBytes/row))
	}
	return max(4, min(maxBlockRows, blockBytes/row))
}

// tableBytes is the size of the node tables the walk reads.
func (d *tableData) tableBytes() int {
	return len(d.nodes)*(typeSize(d.featType)+typeSize(d.farType)+8) + 8*len(d.leaves)
}

// tableRows declares the batch walk:
//
//	const blockRows = 64
//
//	func extendRow(x *[NumFeatures]float64, xx *[xxLen]float64) { … }
//	func finishRow(s float64) [NumOutputs]float64 { … }
//	func predictRows(rows [][]float64, out []float64) { … }
func (g *gen) tableRows(d *tableData) []jen.Code {
	x := jen.Id("x").Op("*").Index(jen.Id("NumFeatures")).Float64()
	xx := jen.Id("xx").Op("*").Index(jen.Id("xxLen")).Float64()
	extend := jen.Comment("extendRow fills xx from x as Predict does.").Line().
		Func().Id("extendRow").Params(x, xx).Block(extendFill(g.fillValue(d.variants))...)
	return []jen.Code{
		jen.Comment("blockRows is the number of rows predictRows walks each group of trees for.").Line().
			Const().Id("blockRows").Op("=").Lit(g.blockRows(d)),
		extend, g.finishRow(), g.predictRows(),
	}
}

// rowAccType is one row's accumulator: float64, or [NumOutputs]float64.
func (g *gen) rowAccType() jen.Code {
	if g.k == 1 {
		return jen.Float64()
	}
	return jen.Index(jen.Id("NumOutputs")).Float64()
}

// finishRow is the end of Predict on one row's sum of leaves:
//
//	func finishRow(s float64) [NumOutputs]float64 {
//		return [NumOutputs]float64{sigmoid(s)}
//	}
func (g *gen) finishRow() jen.Code {
	param, body := jen.Id("s").Add(g.rowAccType()), g.scalarFinish()
	if g.k > 1 {
		param, body = jen.Id("acc").Add(g.rowAccType()), g.vectorFinish()
	}
	return jen.Comment("finishRow turns one row's sum of leaves into its outputs as Predict does.").Line().
		Func().Id("finishRow").Params(param).Index(jen.Id("NumOutputs")).Float64().Block(body...)
}

// rowStart is the value a row's sum starts from, as in Predict.
func (g *gen) rowStart() jen.Code {
	switch {
	case g.k == 1 && g.p.Combine == forest.Sum:
		return g.float(g.p.BaseScore[0])
	case g.k == 1:
		return g.float(0)
	case g.p.Combine == forest.Sum:
		return jen.Id("baseScore")
	}
	return jen.Index(jen.Id("NumOutputs")).Float64().Values()
}

// predictRows is the batch walk:
//
//	func predictRows(rows [][]float64, out []float64) {
//		var xx [blockRows][xxLen]float64
//		var acc [blockRows]float64
//		for len(rows) > 0 {
//			blk := rows[:min(blockRows, len(rows))]
//			for r, x := range blk {
//				extendRow((*[NumFeatures]float64)(x), &xx[r])
//				acc[r] = 0.5
//			}
//			for t := 0; t+8 <= numTrees; t += 8 {
//				rt := roots[t:][:8]
//				for r := range blk {
//					a, …, h := leaf8(&xx[r], int(rt[0]), …, int(rt[7]))
//					acc[r] += thr[a]
//					…
//				}
//			}
//			{
//				rt := roots[numTrees-2:] // the last trees, as in Predict
//				for r := range blk {
//					a, b, _, _ := leaf4(&xx[r], int(rt[0]), int(rt[1]), int(rt[1]), int(rt[1]))
//					acc[r] += thr[a]
//					acc[r] += thr[b]
//				}
//			}
//			for r := range blk {
//				y := finishRow(acc[r])
//				copy(out[r*NumOutputs:], y[:])
//			}
//			rows, out = rows[len(blk):], out[len(blk)*NumOutputs:]
//		}
//	}
func (g *gen) predictRows() jen.Code {
	lanes := g.lanes()
	rem := len(g.p.Trees) % lanes
	group := jen.For(jen.Id("t").Op(":=").Lit(0), jen.Id("t").Op("+").Lit(lanes).Op("<=").Id("numTrees"), jen.Id("t").Op("+=").Lit(lanes)).Block(
		jen.Id("rt").Op(":=").Id("roots").Index(jen.Id("t").Op(":")).Index(jen.Op(":").Lit(lanes)),
		jen.For(jen.Id("r").Op(":=").Range().Id("blk")).Block(g.rowWalk(lanes, lanes)...),
	)
	tail := jen.Null()
	if rem > 0 { // in a block of its own, since rt is declared again
		tail = jen.Block(
			jen.Id("rt").Op(":=").Id("roots").Index(jen.Id("numTrees").Op("-").Lit(rem).Op(":")),
			jen.For(jen.Id("r").Op(":=").Range().Id("blk")).Block(g.rowWalk(g.tailLanes(), rem)...),
		)
	}
	r := jen.Id("r")
	block := []jen.Code{
		jen.Id("blk").Op(":=").Id("rows").Index(jen.Op(":").Min(jen.Id("blockRows"), jen.Len(jen.Id("rows")))),
		jen.For(jen.List(r.Clone(), jen.Id("x")).Op(":=").Range().Id("blk")).Block(
			jen.Id("extendRow").Call(jen.Parens(jen.Op("*").Index(jen.Id("NumFeatures")).Float64()).Call(jen.Id("x")), jen.Op("&").Id("xx").Index(r)),
			jen.Id("acc").Index(r).Op("=").Add(g.rowStart()),
		),
		group,
		tail,
		jen.For(r.Clone().Op(":=").Range().Id("blk")).Block(
			jen.Id("y").Op(":=").Id("finishRow").Call(jen.Id("acc").Index(r)),
			jen.Copy(jen.Id("out").Index(r.Clone().Op("*").Id("NumOutputs").Op(":")), jen.Id("y").Index(jen.Op(":"))),
		),
		jen.List(jen.Id("rows"), jen.Id("out")).Op("=").List(jen.Id("rows").Index(jen.Len(jen.Id("blk")).Op(":")),
			jen.Id("out").Index(jen.Len(jen.Id("blk")).Op("*").Id("NumOutputs").Op(":"))),
	}
	return jen.Comment("predictRows scores rows into out a block at a time: each group of trees walks").Line().
		Comment("every row of the block before the next group starts, and each row adds its").Line().
		Comment("leaves in tree order, so every output is Predict's, bit for bit.").Line().
		Func().Id("predictRows").Params(jen.Id("rows").Index().Index().Float64(), jen.Id("out").Index().Float64()).Block(
		jen.Var().Id("xx").Index(jen.Id("blockRows")).Index(jen.Id("xxLen")).Float64(),
		jen.Var().Id("acc").Index(jen.Id("blockRows")).Add(g.rowAccType()),
		jen.For(jen.Len(jen.Id("rows")).Op(">").Lit(0)).Block(block...),
	)
}

// laneCall is `l0, l1, _ := leafW(x, int(roots[0]), int(roots[1]),
// int(roots[1]))`: the walk of width lanes over the n trees whose roots are
// roots[0:n], the last root repeated in the unused lanes, whose leaves go
// to laneIDs[0:n].
func laneCall(x jen.Code, roots string, width, n int) jen.Code {
	lhs := make([]jen.Code, width)
	args := []jen.Code{x}
	for i := range width {
		args = append(args, jen.Int().Parens(jen.Id(roots).Index(jen.Lit(min(i, n-1)))))
		lhs[i] = jen.Id("_")
		if i < n {
			lhs[i] = jen.Id(laneIDs[i])
		}
	}
	return jen.List(lhs...).Op(":=").Id(leafFunc(width)).Call(args...)
}

// rowWalk walks row r through the trees rt[0:n] with the walk of the given
// width (the last root repeated in the unused places) and adds their leaves
// to acc[r] in tree order.
func (g *gen) rowWalk(width, n int) []jen.Code {
	out := []jen.Code{laneCall(jen.Op("&").Id("xx").Index(jen.Id("r")), "rt", width, n)}
	for i := range n {
		leaf := jen.Id("thr").Index(jen.Id(laneIDs[i]))
		if g.k > 1 {
			out = append(out, jen.Id("addLeaf").Call(jen.Op("&").Id("acc").Index(jen.Id("r")), jen.Int().Parens(leaf)))
		} else {
			out = append(out, jen.Id("acc").Index(jen.Id("r")).Op("+=").Add(leaf))
		}
	}
	return out
}
