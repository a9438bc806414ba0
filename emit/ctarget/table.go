package ctarget

import (
	"fmt"
	"math"
	"math/bits"
	"slices"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
)

// The table layout. Each tree's splits are packed words in preorder, one
// word per split and none per leaf:
//
//	bits, low to high: feature | threshold index | missing-left | less-than |
//	                   left is a leaf | right is a leaf | size of the left subtree
//
// The left child, when a split, is the next word; the right child, when a
// split, is the word after the left subtree. A walk also counts the leaves it
// passes: in preorder, a tree with s splits has s+1 leaves, so the leaves
// before tree t number start[t]+t, and going right over a left subtree of a
// splits passes a+1 of them. The leaf reached is therefore known by its
// preorder number without being stored; it indexes a table of the distinct
// leaf vectors (or the vectors themselves, when that is smaller).
//
// Thresholds live in tables of the distinct values, sorted per feature,
// addressed either globally or per feature (then through thr_base), whichever
// keeps the word narrower. A "<" comparison becomes "<=" against the next
// value below the threshold in the target's type (exact: no value lies
// between); the less-than bit remains only for a threshold whose next value
// below would be -infinity.
type tableLayout struct {
	wordBits int // 16, 32 or 64
	fBits    int
	tBits    int
	hasML    bool
	hasLT    bool
	hasSet   bool // some split is a set split: its index field is its set number
	hasZM    bool // some split counts zeros as missing
	// p1 holds the splits in the left subtree, or with inWord at a split
	// whose left child is a leaf, that leaf's row; p2 (only with inWord)
	// the row of a right leaf child.
	p1Bits, p2Bits int
	inWord         bool      // leaf rows in the split words, no per-leaf table
	soleRow        []int     // per tree, the row of its leaf if it is one leaf, else -1
	hasSole        bool      // some tree is a single leaf
	perFeat        bool      // threshold index is local to the feature
	thr            []float64 // distinct thresholds, by feature then value
	// inline: the threshold of split word i is splitThr[i], one per split
	// in preorder, and the word holds no threshold index (chosen where
	// thresholds rarely repeat, so the index costs more than the sharing saves).
	inline   bool
	splitThr []float64
	thrBase  []int // per feature, first index in thr (when perFeat)
	thrFloat bool  // every threshold is a float value
	// round32: in double mode, every split is x op m with m the midpoint
	// the float32 pass makes of a float threshold t32
	// (compile.Program.Midpoints32), so the walk tests (float)x <= t32 and
	// stores t32. C's conversion of a double to float rounds to nearest
	// even and overflows to an infinity (IEC 60559, C99 Annex F.3), as
	// round32 does.
	round32   bool
	words     []uint64
	treeStart []int // len T+1, in words
	treeNodes []int // words per tree, for comments
	// leafRows are the distinct leaf vectors of the trees that add to
	// every output, of width NumOutputs; or, when every tree adds to one
	// output of several, their values, of width 1. In a model mixing the
	// two, rows1 holds the values of the trees of one output.
	leafRows  *leafRows
	width     int
	rows1     *leafRows
	mixed     bool
	hasOut    bool  // some tree adds to one output of several: NAME_out is written
	leafOf    []int // per leaf in preorder, its row of leafRows (rows1 for a leaf of a tree of one output when mixed)
	direct    bool  // leaf vectors stored per leaf, not by row
	leafFloat bool  // every leaf value is a float value
	// counts, when set, holds every leaf row as class counts (counts.go).
	counts *leafCounts
	// packBits, with Options.Pack, is the width of a packed split word
	// (packbits.go), or 0: words of wordBits.
	packBits int
}

// tableSplit is one split as buildTable collects it, before packing.
type tableSplit struct {
	feature   int
	thr       float64
	lt, ml    bool
	set       int // the set number at a set split, else -1
	zm        bool
	ll, rl    bool
	leftCount int
	// rows of leafRows of a leaf left or right child
	leftRow, rightRow int
}

// wordChoice is one way of packing the split words: thresholds addressed
// per feature or globally, leaf rows in the words or in a table of their
// own; bits is the word's width in use and bytes what all tables take.
type wordChoice struct {
	perFeat, inWord, inline bool
	bits, bytes             int
}

// buildTable lays the program out as tables: the leaf tables, the splits
// in preorder with the distinct thresholds they address, the cheapest word
// format, and the packed words.
func (g *gen) buildTable() (*tableLayout, error) {
	tl := &tableLayout{width: g.p.NumOutputs}
	g.tableLeaves(tl)
	tl.counts = g.leafCountsOf(tl)
	g.packCounts(tl)
	tl.round32 = !g.o.Float && g.p.Midpoints32
	splits, thrSet := g.tableSplits(tl)
	index, maxLocal := tl.thresholdTables(thrSet)
	tl.fBits = bitsFor(len(g.p.Features) - 1)
	maxLeft := tl.scanSplits(splits)
	tl.leafFloat = tl.leafValuesFloat()
	best, sizes := g.chooseWord(tl, splits, maxLocal, maxLeft)
	if best == nil {
		return nil, fmt.Errorf("table layout: a split needs more than 64 bits (%d features, %d distinct thresholds, left subtrees of %d splits)\nhint: use the nested layout",
			len(g.p.Features), len(tl.thr), maxLeft)
	}
	if g.tableMode != 0 {
		best.inWord = g.tableMode == 2
	}
	tl.perFeat, tl.inWord, tl.inline = best.perFeat, best.inWord, best.inline
	tl.wordBits = wordBits(best.bits)
	tl.tBits = bitsFor(len(tl.thr) - 1)
	switch {
	case tl.inline:
		tl.tBits = 0
		for _, s := range splits {
			tl.splitThr = append(tl.splitThr, s.thr)
		}
	case tl.perFeat:
		tl.tBits = bitsFor(maxLocal - 1)
	}
	tl.tBits = max(tl.tBits, bitsFor(len(g.sets.sets)-1))
	tl.p1Bits = sizes.aBits
	if tl.inWord {
		tl.p1Bits, tl.p2Bits = max(sizes.aBits, sizes.rBits), sizes.rBits
	}
	tl.packWords(splits, index)
	tl.choosePackedWord(g)
	nLeaves, nRows, k, vb := len(tl.leafOf), sizes.nRows, tl.width, tl.leafElemBytes(g)
	tl.direct = !tl.inWord && !tl.mixed && nLeaves*k*vb <= packedLeafRowBytes(nLeaves, nRows, g.o.Pack)+tl.rowTableBytes(g, nRows)
	tl.dropPackedCounts()
	return tl, nil
}

// tableLeaves chooses the leaf tables: the distinct leaf vectors, or the
// values of trees of one output when every tree is one, or both (mixed).
func (g *gen) tableLeaves(tl *tableLayout) {
	for ti := range g.p.Trees {
		tl.hasOut = tl.hasOut || g.scalarTree(ti)
	}
	tl.leafRows = g.distinctLeaves()
	switch {
	case tl.hasOut && !g.anyFullTree():
		tl.leafRows, tl.width = g.distinctLeavesOf(true), 1
	case tl.hasOut:
		tl.rows1, tl.mixed = g.distinctLeavesOf(true), true
	}
}

// rowsOf is the leaf table that tree ti's leaves are rows of.
func (g *gen) rowsOf(tl *tableLayout, ti int) *leafRows {
	if tl.mixed && g.scalarTree(ti) {
		return tl.rows1
	}
	return tl.leafRows
}

// tableSplits walks every tree in preorder, collecting its splits, the
// leaf row of every leaf (tl.leafOf), where each tree starts and, per
// feature, the distinct thresholds as stored (normalised to <=, or with
// round32 the float32 the midpoint stands for).
func (g *gen) tableSplits(tl *tableLayout) ([]tableSplit, []map[uint64]bool) {
	p := g.p
	var splits []tableSplit
	thrSet := make([]map[uint64]bool, len(p.Features))
	for i := range thrSet {
		thrSet[i] = map[uint64]bool{}
	}
	tl.treeStart = append(tl.treeStart, 0)
	for ti := range p.Trees {
		t := &p.Trees[ti]
		rows := g.rowsOf(tl, ti)
		// Splits below each node, by a reverse sweep of the preorder
		// (children come after their parent).
		below := make([]int, len(t.Nodes))
		for i := len(t.Nodes) - 1; i >= 0; i-- {
			if n := &t.Nodes[i]; !n.IsLeaf() {
				below[i] = 1 + below[n.Left] + below[n.Right]
			}
		}
		stack := []int32{0}
		for len(stack) > 0 {
			i := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			n := &t.Nodes[i]
			if n.IsLeaf() {
				tl.leafOf = append(tl.leafOf, rows.row(g.leaves[ti][i]))
				continue
			}
			sp := tableSplit{feature: n.Feature, set: -1, ml: n.MissingLeft, zm: n.ZeroMissing,
				ll: t.Nodes[n.Left].IsLeaf(), rl: t.Nodes[n.Right].IsLeaf(), leftCount: below[n.Left]}
			if n.IsSetSplit() {
				sp.set = g.sets.of(n)
			} else {
				th, lt := g.normalise(n.Op, n.Threshold)
				if tl.round32 {
					th, lt = float64(compile.Floor32(n.Threshold)), false
				}
				if th == 0 {
					th = 0 // x <= -0 and x <= 0 agree everywhere
				}
				thrSet[n.Feature][math.Float64bits(th)] = true
				sp.thr, sp.lt = th, lt
			}
			if sp.ll {
				sp.leftRow = rows.row(g.leaves[ti][n.Left])
			}
			if sp.rl {
				sp.rightRow = rows.row(g.leaves[ti][n.Right])
			}
			splits = append(splits, sp)
			stack = append(stack, n.Right, n.Left)
		}
		sole := -1
		if t.Nodes[0].IsLeaf() {
			sole = rows.row(g.leaves[ti][0])
			tl.hasSole = true
		}
		tl.soleRow = append(tl.soleRow, sole)
		tl.treeStart = append(tl.treeStart, len(splits))
		tl.treeNodes = append(tl.treeNodes, len(t.Nodes))
	}
	return splits, thrSet
}

// thresholdTables sorts each feature's distinct thresholds into tl.thr
// (feature by feature, tl.thrBase marking where each starts) and returns
// each threshold's index within its feature and the most any feature has.
func (tl *tableLayout) thresholdTables(thrSet []map[uint64]bool) (index []map[uint64]int, maxLocal int) {
	index = make([]map[uint64]int, len(thrSet))
	tl.thrFloat = true
	for f := range thrSet {
		vals := make([]float64, 0, len(thrSet[f]))
		for b := range thrSet[f] {
			vals = append(vals, math.Float64frombits(b))
		}
		slices.Sort(vals)
		index[f] = map[uint64]int{}
		tl.thrBase = append(tl.thrBase, len(tl.thr))
		for i, v := range vals {
			index[f][math.Float64bits(v)] = i
			tl.thr = append(tl.thr, v)
			if float64(float32(v)) != v {
				tl.thrFloat = false
			}
		}
		maxLocal = max(maxLocal, len(vals))
	}
	return index, maxLocal
}

// scanSplits sets the flags some split needs and returns the largest left
// subtree, in splits.
func (tl *tableLayout) scanSplits(splits []tableSplit) (maxLeft int) {
	for _, s := range splits {
		tl.hasML = tl.hasML || s.ml
		tl.hasLT = tl.hasLT || s.lt
		tl.hasSet = tl.hasSet || s.set >= 0
		tl.hasZM = tl.hasZM || s.zm
		maxLeft = max(maxLeft, s.leftCount)
	}
	return maxLeft
}

// leafValuesFloat reports whether every leaf value is a float value.
func (tl *tableLayout) leafValuesFloat() bool {
	for _, r := range []*leafRows{tl.leafRows, tl.rows1} {
		if r == nil {
			continue
		}
		for _, v := range r.vecs {
			for _, x := range v {
				if float64(float32(x)) != x {
					return false
				}
			}
		}
	}
	return true
}

// How the split words address their thresholds: an index into all the
// distinct thresholds, an index into the feature's, or none (inline: one
// threshold per split, in the words' order).
const (
	thrGlobal = iota
	thrPerFeature
	thrInline
)

// tableSizes are the field widths the word choice found: aBits for the
// largest left subtree, rBits for the largest leaf row, of nRows rows.
type tableSizes struct{ aBits, rBits, nRows int }

// chooseWord prices the word for each choice of threshold addressing and
// leaf mode; the cheapest wins (ties: leaves outside the word, the plainer
// walk). nil when no choice fits in 64 bits.
func (g *gen) chooseWord(tl *tableLayout, splits []tableSplit, maxLocal, maxLeft int) (*wordChoice, tableSizes) {
	p := g.p
	k := tl.width
	vb := tl.leafElemBytes(g)
	nLeaves, nRows := len(tl.leafOf), len(tl.leafRows.vecs)
	rowBytes := tl.rowTableBytes(g, nRows)
	if tl.mixed {
		nRows = max(nRows, len(tl.rows1.vecs))
		rowBytes += len(tl.rows1.vecs) * vb
	}
	aBits, rBits := bitsFor(maxLeft), bitsFor(nRows-1)
	flags := b2i(tl.hasML) + b2i(tl.hasLT) + b2i(tl.hasSet) + b2i(tl.hasZM) + 2
	setBits := bitsFor(len(g.sets.sets) - 1)
	var best *wordChoice
	for _, inWord := range []bool{false, true} {
		for _, addr := range []int{thrGlobal, thrPerFeature, thrInline} {
			if addr == thrInline && (tl.hasSet || g.tableMode == 1 || g.tableMode == 2) || addr != thrInline && g.tableMode == 3 {
				continue // a set split's index is its set number; tableMode forces a choice in tests
			}
			perFeat := addr == thrPerFeature
			tb := bitsFor(len(tl.thr) - 1)
			if perFeat {
				tb = bitsFor(maxLocal - 1)
			}
			tb = max(tb, setBits)
			c := wordChoice{perFeat: perFeat, inWord: inWord, inline: addr == thrInline}
			if c.inline {
				tb = 0
				c.bytes += (len(splits) - len(tl.thr)) * tl.thrElemBytes(g) // beside the distinct ones
			}
			leafBytes := rowBytes
			if inWord {
				c.bits = tl.fBits + tb + flags + max(aBits, rBits) + rBits
			} else {
				c.bits = tl.fBits + tb + flags + aBits
				leafBytes += packedLeafRowBytes(nLeaves, nRows, g.o.Pack)
				if !tl.mixed {
					leafBytes = min(leafBytes, nLeaves*k*vb)
				}
			}
			c.bytes += leafBytes
			if perFeat {
				c.bytes += len(p.Features) * intBytes(len(tl.thr))
			}
			wb := wordBits(c.bits)
			if wb == 0 {
				continue
			}
			c.bytes += wordTableBytes(len(splits), c.bits, g.o.Pack)
			if best == nil || c.bytes < best.bytes {
				best = &c
			}
		}
	}
	return best, tableSizes{aBits: aBits, rBits: rBits, nRows: nRows}
}

// packWords packs every split into its word, in the format chosen.
func (tl *tableLayout) packWords(splits []tableSplit, index []map[uint64]int) {
	for _, s := range splits {
		var ti int
		switch {
		case s.set >= 0:
			ti = s.set
		case tl.inline:
			ti = 0
		default:
			ti = index[s.feature][math.Float64bits(s.thr)]
			if !tl.perFeat {
				ti += tl.thrBase[s.feature]
			}
		}
		w := uint64(s.feature) | uint64(ti)<<tl.tShift()
		if s.ml {
			w |= tl.mlBit()
		}
		if s.lt {
			w |= tl.ltBit()
		}
		if s.set >= 0 {
			w |= tl.setBit()
		}
		if s.zm {
			w |= tl.zmBit()
		}
		if s.ll {
			w |= tl.llBit()
		}
		if s.rl {
			w |= tl.rlBit()
		}
		p1 := s.leftCount
		if tl.inWord && s.ll {
			p1 = s.leftRow
		}
		w |= uint64(p1) << tl.p1Shift()
		if tl.inWord && s.rl {
			w |= uint64(s.rightRow) << tl.p2Shift()
		}
		tl.words = append(tl.words, w)
	}
}

// normalise returns the threshold to store and whether the less-than bit is
// needed: x < t is x <= (the next value below t) for every x of the target
// type that is not NaN.
func (g *gen) normalise(op compile.Op, t float64) (float64, bool) {
	if op == compile.LE {
		return t, false
	}
	var below float64
	if g.o.Float {
		below = float64(math.Nextafter32(float32(t), float32(math.Inf(-1))))
	} else {
		below = math.Nextafter(t, math.Inf(-1))
	}
	if math.IsInf(below, -1) {
		return t, true
	}
	return below, false
}

func (tl *tableLayout) tShift() int    { return tl.fBits }
func (tl *tableLayout) flagShift() int { return tl.fBits + tl.tBits }
func (tl *tableLayout) mlBit() uint64  { return 1 << tl.flagShift() }
func (tl *tableLayout) ltBit() uint64  { return 1 << (tl.flagShift() + b2i(tl.hasML)) }
func (tl *tableLayout) setBit() uint64 { return 1 << (tl.flagShift() + b2i(tl.hasML) + b2i(tl.hasLT)) }
func (tl *tableLayout) zmBit() uint64 {
	return 1 << (tl.flagShift() + b2i(tl.hasML) + b2i(tl.hasLT) + b2i(tl.hasSet))
}
func (tl *tableLayout) llBit() uint64 {
	return 1 << (tl.flagShift() + b2i(tl.hasML) + b2i(tl.hasLT) + b2i(tl.hasSet) + b2i(tl.hasZM))
}
func (tl *tableLayout) rlBit() uint64 { return tl.llBit() << 1 }
func (tl *tableLayout) p1Shift() int {
	return tl.flagShift() + b2i(tl.hasML) + b2i(tl.hasLT) + b2i(tl.hasSet) + b2i(tl.hasZM) + 2
}
func (tl *tableLayout) p2Shift() int { return tl.p1Shift() + tl.p1Bits }

func (tl *tableLayout) thrElemBytes(g *gen) int {
	if g.o.Float || tl.thrFloat || tl.round32 {
		return 4
	}
	return 8
}

func (tl *tableLayout) leafElemBytes(g *gen) int {
	if g.il != nil {
		return g.il.bits / 8
	}
	if tl.counts != nil {
		return tl.counts.bytes
	}
	if g.at == "float" || tl.leafFloat {
		return 4
	}
	return 8
}

func nbits(n int) string {
	if n == 1 {
		return "1 bit"
	}
	return fmt.Sprintf("%d bits", n)
}

// bitsFor is the number of bits that hold 0..n (0 for n <= 0).
func bitsFor(n int) int {
	if n <= 0 {
		return 0
	}
	return bits.Len(uint(n))
}

// wordBits is the narrowest unsigned type holding n bits, 0 past 64.
func wordBits(n int) int {
	switch {
	case n <= 16:
		return 16
	case n <= 32:
		return 32
	case n <= 64:
		return 64
	}
	return 0
}

// intBytes is the size of the narrowest unsigned type holding 0..n.
func intBytes(n int) int {
	switch {
	case n < 1<<8:
		return 1
	case n < 1<<16:
		return 2
	}
	return 4
}

func uintType(b int) string { return fmt.Sprintf("uint%d_t", 8*b) }

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// hexLit is an unsigned constant of the word type.
func hexLit(v uint64) string {
	if v > math.MaxUint32 {
		return fmt.Sprintf("0x%xull", v)
	}
	return fmt.Sprintf("0x%xu", v)
}

// tableWriter writes a built table layout: its constant arrays, then
// NAME_predict's loop over them, then (called later by writeBatch)
// NAME_predict_batch. The fields are what those steps share.
type tableWriter struct {
	g  *gen
	tl *tableLayout
	w  *printer
	k  int    // the width of a leaf vector
	wt string // the type of a split word
	tt string // the element type of NAME_thr
	vt string // the type a split compares the input in
	lt string // the element type of the leaf tables
	// llit writes a leaf value of type lt; exactNote says, in a table's
	// comment, that leaf values are stored as float because they all are
	// float values; conv widens a stored leaf to the accumulator's type.
	llit      func(float64) string
	exactNote string
	conv      string
	// th is the threshold of the split in word w, as a C expression of
	// w and f; left is the test "v goes left"; general says that a set
	// split or a number counting as missing takes part in that test.
	th, left string
	general  bool
	// batch is set while NAME_predict_batch is written: lane l then walks
	// its own row xl and adds to its own outputs ol.
	batch bool
}

// table writes the tables and the loop that walks them.
func (g *gen) table(w *printer) error {
	tl, err := g.buildTable()
	if err != nil {
		return err
	}
	t := newTableWriter(g, tl, w)
	if tl.usesPacking(g) {
		g.writeFieldFunc(w)
	}
	g.writeSets(w)
	t.splitWords()
	t.treeStarts()
	t.thresholds()
	t.outputsAndLeaves()
	t.walkTests()
	t.predict()
	if g.il == nil {
		g.batch = t.predictBatch
	}
	return nil
}

func newTableWriter(g *gen, tl *tableLayout, w *printer) *tableWriter {
	t := &tableWriter{g: g, tl: tl, w: w, k: tl.width, wt: fmt.Sprintf("uint%d_t", tl.wordBits)}
	if tl.packBits > 0 {
		t.wt = "uint32_t"
	}
	t.tt = g.ft
	if !g.o.Float && (tl.thrFloat || tl.round32) {
		t.tt = "float"
	}
	t.vt = g.ft
	if tl.round32 {
		t.vt = "float"
	}
	t.lt = g.at
	if tl.leafFloat {
		t.lt = "float"
	}
	t.llit = g.alit
	if t.lt == "float" {
		t.llit = floatLit
	}
	t.exactNote = map[bool]string{true: " (all exact as float)"}[t.lt != g.at]
	if t.lt != g.at {
		t.conv = "(double)"
	}
	if g.il != nil {
		t.lt, t.llit, t.conv = g.il.leafType(), g.il.leafLit, ""
		t.exactNote = fmt.Sprintf(", scaled by 2^%d and rounded (%s_LEAF_SCALE)", g.il.shift, g.upper)
	}
	if tl.counts != nil {
		t.lt, t.conv = uintType(tl.counts.bytes), ""
		t.exactNote = " as class counts c_j: the value of class j is c_j divided by the counts' sum"
	}
	return t
}

// leafLit is component j of leaf row r as its table stores it.
func (t *tableWriter) leafLit(r, j int) string {
	if t.tl.counts != nil {
		return fmt.Sprintf("%du", t.tl.counts.rows[r][j])
	}
	return t.llit(t.tl.leafRows.vecs[r][j])
}

// splitWords writes NAME_node, the split words, one line per tree (or
// several when long), under a comment spelling out the word's fields.
func (t *tableWriter) splitWords() {
	g, tl, w, p := t.g, t.tl, t.w, t.g.p
	idx := fmt.Sprintf(", threshold index (%s)", nbits(tl.tBits))
	if tl.inline {
		idx = " (no threshold index: " + g.name + "_thr holds one threshold per word)"
	}
	if tl.hasSet {
		idx = fmt.Sprintf(", threshold index, or set number at a set split (%s)", nbits(tl.tBits))
	}
	w.line("/* Splits, per tree in preorder, low bits first: feature (%s)%s%s%s%s%s,", nbits(tl.fBits), idx,
		map[bool]string{true: ", missing goes left (1 bit)"}[tl.hasML], map[bool]string{true: ", less-than (1 bit)"}[tl.hasLT],
		map[bool]string{true: ", set split (1 bit)"}[tl.hasSet], map[bool]string{true: ", zero is missing (1 bit)"}[tl.hasZM])
	if tl.inWord {
		w.line(" * left is a leaf (1 bit), right is a leaf (1 bit), then (%s) the left leaf's row of %s_leaf", nbits(tl.p1Bits), g.name)
		w.line(" * if the left child is a leaf, else the splits in the left subtree, then (%s) the right", nbits(tl.p2Bits))
		w.line(" * leaf's row if the right child is a leaf. */")
	} else {
		w.line(" * left is a leaf (1 bit), right is a leaf (1 bit), splits in the left subtree (%s). */", nbits(tl.p1Bits))
	}
	if tl.packBits > 0 {
		t.writePackedWords()
		return
	}
	nWords := max(len(tl.words), 1) // C has no empty arrays
	w.line("static const %s %s_node[%d] = {", t.wt, g.name, nWords)
	for ti := range p.Trees {
		ws := tl.words[tl.treeStart[ti]:tl.treeStart[ti+1]]
		if g.comments && len(ws) > 0 {
			w.line("\t/* tree %d */", p.Trees[ti].Source)
		}
		g.numbers(w, len(ws), func(i int) string { return hexLit(ws[i]) })
	}
	if len(tl.words) == 0 {
		w.line("\t0")
	}
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_node", "split words", nWords, tl.wordBits / 8})
	w.line("")
}

// treeStarts writes NAME_start, each tree's first word.
func (t *tableWriter) treeStarts() {
	g, tl, w := t.g, t.tl, t.w
	T := len(g.p.Trees)
	sb := intBytes(len(tl.words))
	w.line("/* First word of each tree; tree t has words start[t] to start[t+1]-1. */")
	w.line("static const %s %s_start[%d] = {", uintType(sb), g.name, T+1)
	g.numbers(w, T+1, func(i int) string { return fmt.Sprint(tl.treeStart[i]) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_start", "first word per tree", T + 1, sb})
	w.line("")
}

// thresholds writes NAME_thr, the distinct thresholds, and with per-feature
// addressing NAME_thr_base.
func (t *tableWriter) thresholds() {
	g, tl, w := t.g, t.tl, t.w
	if tl.inline {
		t.inlineThresholds()
		return
	}
	switch {
	case tl.round32:
		w.line("/* Distinct thresholds, by feature, ascending: each split is x <= t after rounding x to")
		w.line(" * float, as the model's float32 comparisons do. */")
	default:
		w.line("/* Distinct thresholds, by feature, ascending%s. */", map[bool]string{true: " (all exact as float)"}[t.tt != g.ft])
	}
	t.thrArray(tl.thr, "distinct thresholds")
	bb := intBytes(len(tl.thr))
	if tl.perFeat {
		w.line("/* First threshold of each feature. */")
		w.line("static const %s %s_thr_base[%d] = {", uintType(bb), g.name, len(tl.thrBase))
		g.numbers(w, len(tl.thrBase), func(i int) string { return fmt.Sprint(tl.thrBase[i]) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_thr_base", "first threshold per feature", len(tl.thrBase), bb})
		w.line("")
	}
}

// inlineThresholds writes NAME_thr with one threshold per split word, in
// the words' order.
func (t *tableWriter) inlineThresholds() {
	g, tl, w := t.g, t.tl, t.w
	round := map[bool]string{true: ", each split being x <= t after rounding x to float, as the model's float32 comparisons do"}[tl.round32]
	w.line("/* The threshold of each split word, in the same order%s%s. */", map[bool]string{true: " (all exact as float)"}[t.tt != g.ft && !tl.round32], round)
	t.thrArray(tl.splitThr, "threshold per split")
}

// thrArray writes NAME_thr holding ths (one 0 when empty: C has no empty
// arrays), in the threshold type, and records it as what.
func (t *tableWriter) thrArray(ths []float64, what string) {
	g, w := t.g, t.w
	n := max(len(ths), 1)
	w.line("static const %s %s_thr[%d] = {", t.tt, g.name, n)
	if len(ths) == 0 {
		w.line("\t0")
	}
	lit := g.lit
	if t.tt == "float" {
		lit = floatLit
	}
	g.numbers(w, len(ths), func(i int) string { return lit(ths[i]) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_thr", what, n, t.tl.thrElemBytes(g)})
	w.line("")
}

// outputsAndLeaves writes what the walk adds once it reaches a leaf: the
// output each tree adds to (NAME_out), the values of trees of one output
// in a mixed model (NAME_leaf1), the leaf vectors (NAME_leaf, per leaf or
// per distinct row with NAME_leaf_row), and the rows of single-leaf trees
// (NAME_sole).
func (t *tableWriter) outputsAndLeaves() {
	g, tl, w, p, k := t.g, t.tl, t.w, t.g.p, t.k
	T := len(p.Trees)
	if tl.hasOut {
		ob := intBytes(p.NumOutputs)
		w.line("/* Per tree, the output it adds to, or %d: every output. */", p.NumOutputs)
		w.line("static const %s %s_out[%d] = {", uintType(ob), g.name, T)
		g.numbers(w, T, func(i int) string {
			if g.scalarTree(i) {
				return fmt.Sprint(p.Trees[i].Output)
			}
			return fmt.Sprint(p.NumOutputs)
		})
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_out", "output per tree", T, ob})
		w.line("")
	}
	if tl.mixed {
		n := len(tl.rows1.vecs)
		w.line("/* Distinct leaf values of the trees of one output%s. */", t.exactNote)
		w.line("static const %s %s_leaf1[%d] = {", t.lt, g.name, max(n, 1))
		g.numbers(w, n, func(i int) string { return t.llit(tl.rows1.vecs[i][0]) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_leaf1", "distinct leaf values of trees of one output", n, tl.leafElemBytes(g)})
		w.line("")
	}
	switch {
	case tl.direct:
		w.line("/* Leaf vectors, per leaf in preorder%s. */", t.exactNote)
		w.line("static const %s %s_leaf[%d] = {", t.lt, g.name, len(tl.leafOf)*k)
		g.numbers(w, len(tl.leafOf)*k, func(i int) string { return t.leafLit(tl.leafOf[i/k], i%k) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_leaf", "leaf vectors", len(tl.leafOf) * k, tl.leafElemBytes(g)})
	default:
		if !tl.inWord {
			t.writeLeafRows()
		}
		if tl.counts != nil && tl.counts.packed != nil {
			t.writePackedCounts()
			break
		}
		n := len(tl.leafRows.vecs)
		w.line("/* Distinct leaf vectors%s. */", t.exactNote)
		w.line("static const %s %s_leaf[%d] = {", t.lt, g.name, n*k)
		g.numbers(w, n*k, func(i int) string { return t.leafLit(i/k, i%k) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_leaf", "distinct leaf vectors", n * k, tl.leafElemBytes(g)})
	}
	w.line("")
	if tl.inWord && tl.hasSole {
		rb := intBytes(tl.maxRows() - 1)
		w.line("/* Per tree that is a single leaf, the row of %s_leaf of its leaf (others 0). */", g.name)
		w.line("static const %s %s_sole[%d] = {", uintType(rb), g.name, T)
		g.numbers(w, T, func(i int) string { return fmt.Sprint(max(tl.soleRow[i], 0)) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_sole", "leaf row of single-leaf trees", T, rb})
		w.line("")
	}
}

// field is the C expression of a field of the word w.
func (t *tableWriter) field(shift, width int) string {
	if width == 0 {
		return "0u"
	}
	return fmt.Sprintf("((uint32_t)(w >> %d) & %s)", shift, hexLit(1<<width-1))
}

// bit is the C expression of a flag of the word w.
func (t *tableWriter) bit(b uint64) string {
	return fmt.Sprintf("((uint32_t)(w >> %d) & 1u)", bits.TrailingZeros64(b))
}

// walkTests builds th and left, the threshold a word addresses and the
// test that sends v left, as far as they do not depend on missing values.
func (t *tableWriter) walkTests() {
	g, tl, p := t.g, t.tl, t.g.p
	idx := t.field(tl.tShift(), tl.tBits)
	if tl.perFeat {
		idx = fmt.Sprintf("%s_thr_base[f] + %s", g.name, idx)
	}
	if tl.hasSet {
		// a set split's index is its set number, not a threshold's
		idx = fmt.Sprintf("%s ? 0u : %s", t.bit(tl.setBit()), idx)
	}
	t.th = fmt.Sprintf("%s_thr[%s]", g.name, idx)
	if tl.inline {
		t.th = g.name + "_thr[i%[1]s]" // the lane's word index, filled in by step
	}
	if t.tt != t.vt {
		t.th = "(double)" + t.th
	}
	t.left = "(uint32_t)(v <= th)"
	if tl.hasLT {
		t.left = fmt.Sprintf("(%s & ((%s ^ 1u) | (uint32_t)(v < th)))", t.left, t.bit(tl.ltBit()))
	}
	t.general = tl.hasSet || tl.hasZM || p.HasMissingValue
	if tl.hasML && !t.general {
		t.left = fmt.Sprintf("(%s | (%s & (uint32_t)(v != v)))", t.left, t.bit(tl.mlBit()))
	}
}

// A walk is three variables per tree: the word it stands on (i), whether
// it has reached its leaf (done), and what names the leaf (at: its number in
// preorder over all trees, or with leaf rows in the words the row of the
// leaf table). begin starts lane l's walk of tree tree.
func (t *tableWriter) begin(l, tree string) {
	g, tl, w := t.g, t.tl, t.w
	w.line("first = %s_start[%s];", g.name, tree)
	w.line("end = %s_start[%s + 1u];", g.name, tree)
	w.line("done%s = (uint32_t)(first == end); /* a tree that is one leaf has no word */", l)
	w.line("i%s = first < end ? first : 0u;", l)
	switch {
	case !tl.inWord:
		w.line("at%s = first + %s; /* leaves before the tree: one more than splits, per tree */", l, tree)
	case tl.hasSole:
		w.line("at%s = %s_sole[%s];", l, g.name, tree)
	default:
		w.line("at%s = 0u;", l)
	}
}

// xOf is the row lane l reads: in predict every lane reads x; in
// predict_batch lane l walks row r + l through xl.
func (t *tableWriter) xOf(l string) string {
	if t.batch {
		return "x" + l
	}
	return "x"
}

// accOf is what lane l adds to: acc in predict, ol in predict_batch.
func (t *tableWriter) accOf(l string) string {
	if t.batch {
		return "o" + l
	}
	return "acc"
}

// step writes one step down of lane l, computed rather than branched on; a
// finished walk stays put.
func (t *tableWriter) step(l string) {
	g, tl, w, p := t.g, t.tl, t.w, t.g.p
	w.line("{")
	w.in()
	if tl.packBits > 0 {
		w.line("const uint32_t w = %s_field(%s_node, i%s * %du, %du);", g.name, g.name, l, tl.packBits, tl.packBits)
	} else {
		w.line("const %s w = %s_node[i%s];", t.wt, g.name, l)
	}
	if tl.fBits == 0 {
		w.line("const uint32_t f = 0u;")
	} else {
		w.line("const uint32_t f = (uint32_t)(w & %s);", hexLit(1<<tl.fBits-1))
	}
	switch {
	case tl.round32 && t.general:
		w.line("const %s xv = %s[f];", g.ft, t.xOf(l))
		w.line("const float v = (float)xv; /* rounded to nearest, as the model's float32 inputs */")
	case tl.round32:
		w.line("const float v = (float)%s[f]; /* rounded to nearest, as the model's float32 inputs */", t.xOf(l))
	default:
		w.line("const %s v = %s[f];", g.ft, t.xOf(l))
	}
	th := t.th
	if tl.inline {
		th = fmt.Sprintf(th, l)
	}
	w.line("const %s th = %s;", t.vt, th)
	if t.general {
		xv := "v"
		if tl.round32 {
			xv = "xv"
		}
		miss := fmt.Sprintf("(uint32_t)(%s != %s)", xv, xv)
		if p.HasMissingValue {
			miss += fmt.Sprintf(" | (uint32_t)%s", g.band(xv, p.MissingLo, p.MissingHi))
		}
		if tl.hasZM {
			miss += fmt.Sprintf(" | (%s & (uint32_t)%s)", t.bit(tl.zmBit()), g.band(xv, -p.ZeroBound, p.ZeroBound))
		}
		w.line("const uint32_t miss = %s;", miss)
		test := t.left
		if tl.hasSet {
			w.line("const uint32_t set = %s;", t.bit(tl.setBit()))
			test = fmt.Sprintf("(set != 0u ? %s_member(%s, %s) : %s)", g.name, g.memberArg(xv), t.field(tl.tShift(), tl.tBits), t.left)
		}
		ml := "0u"
		if tl.hasML {
			ml = t.bit(tl.mlBit())
		}
		t.left = fmt.Sprintf("((%s & (miss ^ 1u)) | (%s & miss))", test, ml)
	}
	w.line("const uint32_t r = %s ^ 1u; /* 1: right */", t.left)
	w.line("const uint32_t p1 = %s;", t.field(tl.p1Shift(), tl.p1Bits))
	w.line("const uint32_t leaf = (uint32_t)(w >> (%d + r)) & 1u; /* the child is a leaf */", bits.TrailingZeros64(tl.llBit()))
	w.line("const uint32_t go = (done%s | leaf) ^ 1u; /* moves to another word */", l)
	if tl.inWord {
		w.line("const uint32_t row = r ? %s : p1;", t.field(tl.p2Shift(), tl.p2Bits))
		w.line("at%s = (leaf & (done%s ^ 1u)) != 0u ? row : at%s;", l, l, l)
		w.line("i%s += go * (1u + (r & (%s ^ 1u)) * p1);", l, t.bit(tl.llBit()))
	} else {
		w.line("at%s += (done%s ^ 1u) * r * (p1 + 1u); /* p1 is 0 when the left child is a leaf */", l, l)
		w.line("i%s += go * (1u + r * p1);", l)
	}
	w.line("done%s |= leaf;", l)
	w.out()
	w.line("}")
}

// row is the row of the leaf table lane l reached.
func (t *tableWriter) row(l string) string {
	if !t.tl.direct && !t.tl.inWord {
		return t.leafRowOf("at" + l)
	}
	return "at" + l
}

// addTo adds a leaf value (of the accumulator's type) to dst: in
// predict_batch under float32 accumulation with the double API, dst is a
// double holding a float value, and the addition is still a float
// operation.
func (t *tableWriter) addTo(dst, v string) string {
	if t.batch && t.g.at != t.g.ft {
		return fmt.Sprintf("%s = (%s)((%s)%s + %s);", dst, t.g.ft, t.g.at, dst, v)
	}
	return fmt.Sprintf("%s += %s;", dst, v)
}

// add adds the leaf lane l reached in tree tree.
func (t *tableWriter) add(l, tree string) {
	g, tl, w := t.g, t.tl, t.w
	full := func() {
		if tl.counts != nil {
			t.addCounts(l)
			return
		}
		if t.k == 1 {
			w.line("%s", t.addTo(t.accOf(l)+"[0]", t.conv+g.name+"_leaf["+t.row(l)+"]"))
			return
		}
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("\t%s", t.addTo(t.accOf(l)+"[j]", fmt.Sprintf("%s%s_leaf[(uint32_t)%s * %s_NUM_OUTPUTS + (uint32_t)j]", t.conv, g.name, t.row(l), g.upper)))
		w.line("}")
	}
	switch {
	case !tl.hasOut:
		full()
	case !tl.mixed:
		w.line("%s", t.addTo(fmt.Sprintf("%s[%s_out[%s]]", t.accOf(l), g.name, tree), t.conv+g.name+"_leaf["+t.row(l)+"]"))
	default:
		w.line("if (%s_out[%s] < %s_NUM_OUTPUTS) {", g.name, tree, g.upper)
		w.line("\t%s", t.addTo(fmt.Sprintf("%s[%s_out[%s]]", t.accOf(l), g.name, tree), t.conv+g.name+"_leaf1["+t.row(l)+"]"))
		w.line("} else {")
		w.in()
		full()
		w.out()
		w.line("}")
	}
}

// lanes are the walks that go down at once, so that their loads overlap.
var lanes = []string{"0", "1", "2", "3"}

// predict writes NAME_predict's body: four trees at a time, then the rest
// one by one.
func (t *tableWriter) predict() {
	g, w := t.g, t.w
	T := len(g.p.Trees)
	T4 := T - T%4
	if T4 > 0 {
		g.predictStart(w, "uint32_t t, first, end;", "uint32_t i0, i1, i2, i3, done0, done1, done2, done3, at0, at1, at2, at3;")
	} else {
		g.predictStart(w, "uint32_t t, first, end;", "uint32_t i0, done0, at0;")
	}
	if T4 > 0 {
		w.line("/* Four trees walk at once, so that their loads overlap; their leaves are")
		w.line(" * added in tree order. */")
		w.line("for (t = 0; t < %du; t += 4u) {", T4)
		w.in()
		for j, l := range lanes {
			t.begin(l, fmt.Sprintf("(t + %du)", j))
		}
		w.line("while ((done0 & done1 & done2 & done3) == 0u) {")
		w.in()
		for _, l := range lanes {
			t.step(l)
		}
		w.out()
		w.line("}")
		for j, l := range lanes {
			t.add(l, fmt.Sprintf("t + %du", j))
		}
		w.out()
		w.line("}")
	}
	if T4 < T {
		w.line("for (t = %du; t < %du; t++) {", T4, T)
		w.in()
		t.begin("0", "t")
		w.line("while (done0 == 0u) {")
		w.in()
		t.step("0")
		w.out()
		w.line("}")
		t.add("0", "t")
		w.out()
		w.line("}")
	}
}

// predictBatch writes NAME_predict_batch: the outputs start at the base
// score, then tree by tree four lanes walk rows, each lane taking the next
// row as soon as its walk ends, and last every row is finished as
// NAME_predict finishes its one.
func (t *tableWriter) predictBatch(w *printer) {
	t.w, t.batch = w, true
	defer func() { t.batch = false }()
	g, p := t.g, t.g.p
	ft, no := g.ft, g.upper+"_NUM_OUTPUTS"
	w.line("void %s_predict_batch(const %s *x, size_t n, %s *outs)", g.name, ft, ft)
	w.line("{")
	w.in()
	w.line("size_t ri;")
	w.line("int j;")
	w.line("uint32_t t, first, end;")
	w.line("uint32_t i0, i1, i2, i3, done0, done1, done2, done3, at0, at1, at2, at3;")
	w.line("uint32_t live0, live1, live2, live3;")
	w.line("size_t next;")
	w.line("const %s *x0 = x, *x1 = x, *x2 = x, *x3 = x;", ft)
	w.line("%s *o0 = outs, *o1 = outs, *o2 = outs, *o3 = outs;", ft)
	w.line("for (ri = 0; ri < n; ri++) {")
	w.in()
	for j := 0; j < p.NumOutputs; j++ {
		start := g.accStart(j)
		if g.at != g.ft {
			start = doubleConst(g.accValue(j))
		}
		w.line("outs[ri * %s + %du] = %s;", no, j, start)
	}
	w.out()
	w.line("}")
	t.batchWalk()
	t.batchFinish()
	w.out()
	w.line("}")
}

// batchWalk writes predict_batch's walk: per tree, each lane takes a row,
// steps down, adds its leaf and takes the next row.
func (t *tableWriter) batchWalk() {
	g, w := t.g, t.w
	nf, no := g.upper+"_NUM_FEATURES", g.upper+"_NUM_OUTPUTS"
	w.line("/* Tree by tree, four rows walking at once, each lane taking the next row")
	w.line(" * as soon as its walk ends; each row's leaves are added in tree order, as")
	w.line(" * in %s_predict. */", g.name)
	w.line("for (t = 0; t < %du; t++) {", len(g.p.Trees))
	w.in()
	w.line("next = 0;")
	for _, l := range lanes {
		w.line("if (next < n) {")
		w.in()
		w.line("x%s = x + next * %s;", l, nf)
		w.line("o%s = outs + next * %s;", l, no)
		w.line("next++;")
		w.line("live%s = 1u;", l)
		t.begin(l, "t")
		w.out()
		w.line("} else { /* no row: the lane stands still on a word that exists */")
		w.line("\tlive%s = 0u;", l)
		w.line("\tdone%s = 1u;", l)
		w.line("\ti%s = 0u;", l)
		w.line("\tat%s = 0u;", l)
		w.line("}")
	}
	w.line("while ((live0 | live1 | live2 | live3) != 0u) {")
	w.in()
	for _, l := range lanes {
		t.step(l)
	}
	for _, l := range lanes {
		w.line("if ((done%s & live%s) != 0u) {", l, l)
		w.in()
		t.add(l, "t")
		w.line("if (next < n) {")
		w.in()
		w.line("x%s = x + next * %s;", l, nf)
		w.line("o%s = outs + next * %s;", l, no)
		w.line("next++;")
		t.begin(l, "t")
		w.out()
		w.line("} else {")
		w.line("\tlive%s = 0u;", l)
		w.line("}")
		w.out()
		w.line("}")
	}
	w.out()
	w.line("}")
	w.out()
	w.line("}")
}

// batchFinish writes predict_batch's last loop: each row's sums through
// the joining and transform NAME_predict ends with (finishBody).
func (t *tableWriter) batchFinish() {
	g, w := t.g, t.w
	ft, no := g.ft, g.upper+"_NUM_OUTPUTS"
	w.line("for (ri = 0; ri < n; ri++) {")
	w.in()
	w.line("%s acc[%s];", g.at, no)
	w.line("%s *const o = outs + ri * %s;", ft, no)
	w.line("for (j = 0; j < %s; j++) {", no)
	if g.at != ft {
		w.line("\tacc[j] = (%s)o[j]; /* exact: a float value */", g.at)
	} else {
		w.line("\tacc[j] = o[j];")
	}
	w.line("}")
	w.line("{")
	w.in()
	w.line("%s *const out = o;", ft) // finishBody writes out[j] from acc[j]
	g.finishBody(w)
	w.out()
	w.line("}")
	w.out()
	w.line("}")
}

// numbers writes n array elements, 8 to a line, each followed by a comma
// (C allows one after the last).
func (g *gen) numbers(w *printer, n int, elem func(int) string) {
	const perLine = 8
	for i := 0; i < n; i += perLine {
		var b strings.Builder
		for j := i; j < min(i+perLine, n); j++ {
			if j > i {
				b.WriteByte(' ')
			}
			b.WriteString(elem(j))
			b.WriteByte(',')
		}
		w.line("\t%s", b.String())
	}
}

// maxRows is the number of rows of the larger leaf table.
func (tl *tableLayout) maxRows() int {
	n := len(tl.leafRows.vecs)
	if tl.mixed {
		n = max(n, len(tl.rows1.vecs))
	}
	return n
}
