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
	thrBase        []int     // per feature, first index in thr (when perFeat)
	thrFloat       bool      // every threshold is a float value
	// round32: in double mode, every split is x op m with m the midpoint
	// the float32 pass makes of a float threshold t32, so the walk tests
	// (float)x <= t32 and stores t32 (see roundsToFloat).
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
}

func (g *gen) buildTable() (*tableLayout, error) {
	p := g.p
	tl := &tableLayout{width: p.NumOutputs}
	for ti := range p.Trees {
		tl.hasOut = tl.hasOut || g.scalarTree(ti)
	}
	tl.leafRows = g.distinctLeaves()
	switch {
	case tl.hasOut && !g.anyFullTree():
		tl.leafRows, tl.width = g.distinctLeavesOf(true), 1
	case tl.hasOut:
		tl.rows1, tl.mixed = g.distinctLeavesOf(true), true
	}
	rowsOf := func(ti int) *leafRows {
		if tl.mixed && g.scalarTree(ti) {
			return tl.rows1
		}
		return tl.leafRows
	}
	type split struct {
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
	var splits []split
	// Per feature, the distinct normalised thresholds.
	thrSet := make([]map[uint64]bool, len(p.Features))
	for i := range thrSet {
		thrSet[i] = map[uint64]bool{}
	}
	tl.round32 = !g.o.Float && roundsToFloat(p)
	tl.treeStart = append(tl.treeStart, 0)
	for ti := range p.Trees {
		t := &p.Trees[ti]
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
				tl.leafOf = append(tl.leafOf, rowsOf(ti).row(g.leaves[ti][i]))
				continue
			}
			sp := split{feature: n.Feature, set: -1, ml: n.MissingLeft, zm: n.ZeroMissing,
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
				sp.leftRow = rowsOf(ti).row(g.leaves[ti][n.Left])
			}
			if sp.rl {
				sp.rightRow = rowsOf(ti).row(g.leaves[ti][n.Right])
			}
			splits = append(splits, sp)
			stack = append(stack, n.Right, n.Left)
		}
		sole := -1
		if t.Nodes[0].IsLeaf() {
			sole = rowsOf(ti).row(g.leaves[ti][0])
			tl.hasSole = true
		}
		tl.soleRow = append(tl.soleRow, sole)
		tl.treeStart = append(tl.treeStart, len(splits))
		tl.treeNodes = append(tl.treeNodes, len(t.Nodes))
	}
	// Threshold tables.
	index := make([]map[uint64]int, len(p.Features))
	maxLocal := 0
	tl.thrFloat = true
	for f := range p.Features {
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
	tl.fBits = bitsFor(len(p.Features) - 1)
	maxLeft := 0
	for _, s := range splits {
		tl.hasML = tl.hasML || s.ml
		tl.hasLT = tl.hasLT || s.lt
		tl.hasSet = tl.hasSet || s.set >= 0
		tl.hasZM = tl.hasZM || s.zm
		maxLeft = max(maxLeft, s.leftCount)
	}
	tl.leafFloat = true
	for _, r := range []*leafRows{tl.leafRows, tl.rows1} {
		if r == nil {
			continue
		}
		for _, v := range r.vecs {
			for _, x := range v {
				if float64(float32(x)) != x {
					tl.leafFloat = false
				}
			}
		}
	}
	k := tl.width
	vb := tl.leafElemBytes(g)
	nLeaves, nRows := len(tl.leafOf), len(tl.leafRows.vecs)
	rowBytes := nRows * k * vb
	if tl.mixed {
		nRows = max(nRows, len(tl.rows1.vecs))
		rowBytes += len(tl.rows1.vecs) * vb
	}
	aBits, rBits := bitsFor(maxLeft), bitsFor(nRows-1)
	flags := b2i(tl.hasML) + b2i(tl.hasLT) + b2i(tl.hasSet) + b2i(tl.hasZM) + 2
	setBits := bitsFor(len(g.sets.sets) - 1)
	// The word for each choice of threshold addressing and leaf mode; the
	// cheapest wins (ties: leaves outside the word, the plainer walk).
	type choice struct {
		perFeat, inWord bool
		bits, bytes     int
	}
	var best *choice
	for _, inWord := range []bool{false, true} {
		for _, perFeat := range []bool{false, true} {
			tb := bitsFor(len(tl.thr) - 1)
			if perFeat {
				tb = bitsFor(maxLocal - 1)
			}
			tb = max(tb, setBits)
			c := choice{perFeat: perFeat, inWord: inWord}
			if inWord {
				c.bits = tl.fBits + tb + flags + max(aBits, rBits) + rBits
				c.bytes = rowBytes
			} else {
				c.bits = tl.fBits + tb + flags + aBits
				c.bytes = nLeaves*intBytes(nRows-1) + rowBytes
				if !tl.mixed {
					c.bytes = min(c.bytes, nLeaves*k*vb)
				}
			}
			if perFeat {
				c.bytes += len(p.Features) * intBytes(len(tl.thr))
			}
			wb := wordBits(c.bits)
			if wb == 0 {
				continue
			}
			c.bytes += len(splits) * wb / 8
			if best == nil || c.bytes < best.bytes {
				best = &c
			}
		}
	}
	if best == nil {
		return nil, fmt.Errorf("table layout: a split needs more than 64 bits (%d features, %d distinct thresholds, left subtrees of %d splits)\nhint: use the nested layout",
			len(p.Features), len(tl.thr), maxLeft)
	}
	if g.tableMode != 0 {
		best.inWord = g.tableMode == 2
	}
	tl.perFeat, tl.inWord = best.perFeat, best.inWord
	tl.wordBits = wordBits(best.bits)
	tl.tBits = bitsFor(len(tl.thr) - 1)
	if tl.perFeat {
		tl.tBits = bitsFor(maxLocal - 1)
	}
	tl.tBits = max(tl.tBits, setBits)
	tl.p1Bits = aBits
	if tl.inWord {
		tl.p1Bits, tl.p2Bits = max(aBits, rBits), rBits
	}
	for _, s := range splits {
		var ti int
		if s.set >= 0 {
			ti = s.set
		} else {
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
	tl.direct = !tl.inWord && !tl.mixed && nLeaves*k*vb <= nLeaves*intBytes(nRows-1)+nRows*k*vb
	return tl, nil
}

// roundsToFloat reports whether every split of p is one the float32 pass
// writes for a float32 model, x op m with (op, m) = compile.Midpoint32(t32)
// for a finite float t32, so that x op m exactly when round32(x) <= t32 for
// every x (compile/float32.go proves it). C's conversion of a double to float
// rounds to nearest even and overflows to an infinity (IEC 60559, C99 Annex
// F.3), as round32 does, so the table may store t32 in 4 bytes and test
// (float)x <= t32.
func roundsToFloat(p *compile.Program) bool {
	any := false
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			n := &p.Trees[ti].Nodes[i]
			if n.IsLeaf() || n.IsSetSplit() {
				continue
			}
			t32 := compile.Floor32(n.Threshold)
			if math.IsInf(float64(t32), 0) {
				return false
			}
			if op, m := compile.Midpoint32(n.Threshold); op != n.Op || m != n.Threshold || float64(t32) == n.Threshold {
				return false
			}
			any = true
		}
	}
	return any
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

// table writes the tables and the loop that walks them.
func (g *gen) table(w *printer) error {
	tl, err := g.buildTable()
	if err != nil {
		return err
	}
	p := g.p
	k := tl.width
	wt := fmt.Sprintf("uint%d_t", tl.wordBits)
	T := len(p.Trees)
	g.writeSets(w)

	// The split words, one line per tree (or several when long).
	idxName := "threshold index"
	if tl.hasSet {
		idxName = "threshold index, or set number at a set split"
	}
	w.line("/* Splits, per tree in preorder, low bits first: feature (%s), %s (%s)%s%s%s%s,", nbits(tl.fBits), idxName, nbits(tl.tBits),
		map[bool]string{true: ", missing goes left (1 bit)"}[tl.hasML], map[bool]string{true: ", less-than (1 bit)"}[tl.hasLT],
		map[bool]string{true: ", set split (1 bit)"}[tl.hasSet], map[bool]string{true: ", zero is missing (1 bit)"}[tl.hasZM])
	if tl.inWord {
		w.line(" * left is a leaf (1 bit), right is a leaf (1 bit), then (%s) the left leaf's row of %s_leaf", nbits(tl.p1Bits), g.name)
		w.line(" * if the left child is a leaf, else the splits in the left subtree, then (%s) the right", nbits(tl.p2Bits))
		w.line(" * leaf's row if the right child is a leaf. */")
	} else {
		w.line(" * left is a leaf (1 bit), right is a leaf (1 bit), splits in the left subtree (%s). */", nbits(tl.p1Bits))
	}
	nWords := max(len(tl.words), 1) // C has no empty arrays
	w.line("static const %s %s_node[%d] = {", wt, g.name, nWords)
	for ti := 0; ti < T; ti++ {
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

	sb := intBytes(len(tl.words))
	w.line("/* First word of each tree; tree t has words start[t] to start[t+1]-1. */")
	w.line("static const %s %s_start[%d] = {", uintType(sb), g.name, T+1)
	g.numbers(w, T+1, func(i int) string { return fmt.Sprint(tl.treeStart[i]) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_start", "first word per tree", T + 1, sb})
	w.line("")

	tt := g.ft
	if !g.o.Float && (tl.thrFloat || tl.round32) {
		tt = "float"
	}
	nThr := max(len(tl.thr), 1)
	switch {
	case tl.round32:
		w.line("/* Distinct thresholds, by feature, ascending: each split is x <= t after rounding x to")
		w.line(" * float, as the model's float32 comparisons do. */")
	default:
		w.line("/* Distinct thresholds, by feature, ascending%s. */", map[bool]string{true: " (all exact as float)"}[tt != g.ft])
	}
	w.line("static const %s %s_thr[%d] = {", tt, g.name, nThr)
	if len(tl.thr) == 0 {
		w.line("\t0")
	}
	lit := g.lit
	if tt == "float" {
		lit = floatLit
	}
	g.numbers(w, len(tl.thr), func(i int) string { return lit(tl.thr[i]) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_thr", "distinct thresholds", nThr, tl.thrElemBytes(g)})
	w.line("")
	bb := intBytes(len(tl.thr))
	if tl.perFeat {
		w.line("/* First threshold of each feature. */")
		w.line("static const %s %s_thr_base[%d] = {", uintType(bb), g.name, len(tl.thrBase))
		g.numbers(w, len(tl.thrBase), func(i int) string { return fmt.Sprint(tl.thrBase[i]) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_thr_base", "first threshold per feature", len(tl.thrBase), bb})
		w.line("")
	}

	lt := g.at
	if tl.leafFloat {
		lt = "float"
	}
	llit := g.alit
	if lt == "float" {
		llit = floatLit
	}
	exactNote := map[bool]string{true: " (all exact as float)"}[lt != g.at]
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
		w.line("/* Distinct leaf values of the trees of one output%s. */", exactNote)
		w.line("static const %s %s_leaf1[%d] = {", lt, g.name, max(n, 1))
		g.numbers(w, n, func(i int) string { return llit(tl.rows1.vecs[i][0]) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_leaf1", "distinct leaf values of trees of one output", n, tl.leafElemBytes(g)})
		w.line("")
	}
	switch {
	case tl.direct:
		w.line("/* Leaf vectors, per leaf in preorder%s. */", exactNote)
		w.line("static const %s %s_leaf[%d] = {", lt, g.name, len(tl.leafOf)*k)
		g.numbers(w, len(tl.leafOf)*k, func(i int) string { return llit(tl.leafRows.vecs[tl.leafOf[i/k]][i%k]) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_leaf", "leaf vectors", len(tl.leafOf) * k, tl.leafElemBytes(g)})
	default:
		if !tl.inWord {
			rb := intBytes(tl.maxRows() - 1)
			w.line("/* Per leaf in preorder, its row of %s_leaf. */", g.name)
			w.line("static const %s %s_leaf_row[%d] = {", uintType(rb), g.name, len(tl.leafOf))
			g.numbers(w, len(tl.leafOf), func(i int) string { return fmt.Sprint(tl.leafOf[i]) })
			w.line("};")
			g.tables = append(g.tables, Table{g.name + "_leaf_row", "leaf row per leaf", len(tl.leafOf), rb})
			w.line("")
		}
		n := len(tl.leafRows.vecs)
		w.line("/* Distinct leaf vectors%s. */", exactNote)
		w.line("static const %s %s_leaf[%d] = {", lt, g.name, n*k)
		g.numbers(w, n*k, func(i int) string { return llit(tl.leafRows.vecs[i/k][i%k]) })
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

	field := func(shift, width int) string {
		if width == 0 {
			return "0u"
		}
		return fmt.Sprintf("((uint32_t)(w >> %d) & %s)", shift, hexLit(1<<width-1))
	}
	bit := func(b uint64) string {
		return fmt.Sprintf("((uint32_t)(w >> %d) & 1u)", bits.TrailingZeros64(b))
	}
	vt := g.ft
	if tl.round32 {
		vt = "float"
	}
	idx := field(tl.tShift(), tl.tBits)
	if tl.perFeat {
		idx = fmt.Sprintf("%s_thr_base[f] + %s", g.name, idx)
	}
	if tl.hasSet {
		// a set split's index is its set number, not a threshold's
		idx = fmt.Sprintf("%s ? 0u : %s", bit(tl.setBit()), idx)
	}
	th := fmt.Sprintf("%s_thr[%s]", g.name, idx)
	if tt != vt {
		th = "(double)" + th
	}
	left := "(uint32_t)(v <= th)"
	if tl.hasLT {
		left = fmt.Sprintf("(%s & ((%s ^ 1u) | (uint32_t)(v < th)))", left, bit(tl.ltBit()))
	}
	// general: a set split or numbers that count as missing
	general := tl.hasSet || tl.hasZM || p.HasMissingValue
	if tl.hasML && !general {
		left = fmt.Sprintf("(%s | (%s & (uint32_t)(v != v)))", left, bit(tl.mlBit()))
	}
	// A walk is three variables per tree: the word it stands on (i), whether
	// it has reached its leaf (done), and what names the leaf (at: its
	// number in preorder over all trees, or with leaf rows in the words the
	// row of the leaf table).
	begin := func(l, t string) {
		w.line("first = %s_start[%s];", g.name, t)
		w.line("end = %s_start[%s + 1u];", g.name, t)
		w.line("done%s = (uint32_t)(first == end); /* a tree that is one leaf has no word */", l)
		w.line("i%s = first < end ? first : 0u;", l)
		switch {
		case !tl.inWord:
			w.line("at%s = first + %s; /* leaves before the tree: one more than splits, per tree */", l, t)
		case tl.hasSole:
			w.line("at%s = %s_sole[%s];", l, g.name, t)
		default:
			w.line("at%s = 0u;", l)
		}
	}
	// In predict every lane reads x and adds to acc; in predict_batch lane
	// l walks row r + l, reading xl and adding to ol.
	batch := false
	xOf := func(l string) string {
		if batch {
			return "x" + l
		}
		return "x"
	}
	accOf := func(l string) string {
		if batch {
			return "o" + l
		}
		return "acc"
	}
	// One step down, computed rather than branched on; a finished walk
	// stays put.
	step := func(l string) {
		w.line("{")
		w.in()
		w.line("const %s w = %s_node[i%s];", wt, g.name, l)
		if tl.fBits == 0 {
			w.line("const uint32_t f = 0u;")
		} else {
			w.line("const uint32_t f = (uint32_t)(w & %s);", hexLit(1<<tl.fBits-1))
		}
		switch {
		case tl.round32 && general:
			w.line("const %s xv = %s[f];", g.ft, xOf(l))
			w.line("const float v = (float)xv; /* rounded to nearest, as the model's float32 inputs */")
		case tl.round32:
			w.line("const float v = (float)%s[f]; /* rounded to nearest, as the model's float32 inputs */", xOf(l))
		default:
			w.line("const %s v = %s[f];", g.ft, xOf(l))
		}
		w.line("const %s th = %s;", vt, th)
		if general {
			xv := "v"
			if tl.round32 {
				xv = "xv"
			}
			miss := fmt.Sprintf("(uint32_t)(%s != %s)", xv, xv)
			if p.HasMissingValue {
				miss += fmt.Sprintf(" | (uint32_t)%s", g.band(xv, p.MissingLo, p.MissingHi))
			}
			if tl.hasZM {
				miss += fmt.Sprintf(" | (%s & (uint32_t)%s)", bit(tl.zmBit()), g.band(xv, -p.ZeroBound, p.ZeroBound))
			}
			w.line("const uint32_t miss = %s;", miss)
			test := left
			if tl.hasSet {
				w.line("const uint32_t set = %s;", bit(tl.setBit()))
				test = fmt.Sprintf("(set != 0u ? %s_member(%s, %s) : %s)", g.name, g.memberArg(xv), field(tl.tShift(), tl.tBits), left)
			}
			ml := "0u"
			if tl.hasML {
				ml = bit(tl.mlBit())
			}
			left = fmt.Sprintf("((%s & (miss ^ 1u)) | (%s & miss))", test, ml)
		}
		w.line("const uint32_t r = %s ^ 1u; /* 1: right */", left)
		w.line("const uint32_t p1 = %s;", field(tl.p1Shift(), tl.p1Bits))
		w.line("const uint32_t leaf = (uint32_t)(w >> (%d + r)) & 1u; /* the child is a leaf */", bits.TrailingZeros64(tl.llBit()))
		w.line("const uint32_t go = (done%s | leaf) ^ 1u; /* moves to another word */", l)
		if tl.inWord {
			w.line("const uint32_t row = r ? %s : p1;", field(tl.p2Shift(), tl.p2Bits))
			w.line("at%s = (leaf & (done%s ^ 1u)) != 0u ? row : at%s;", l, l, l)
			w.line("i%s += go * (1u + (r & (%s ^ 1u)) * p1);", l, bit(tl.llBit()))
		} else {
			w.line("at%s += (done%s ^ 1u) * r * (p1 + 1u); /* p1 is 0 when the left child is a leaf */", l, l)
			w.line("i%s += go * (1u + r * p1);", l)
		}
		w.line("done%s |= leaf;", l)
		w.out()
		w.line("}")
	}
	row := func(l string) string {
		if !tl.direct && !tl.inWord {
			return fmt.Sprintf("%s_leaf_row[at%s]", g.name, l)
		}
		return "at" + l
	}
	conv := ""
	if lt != g.at {
		conv = "(double)"
	}
	// addTo adds a leaf value (of the accumulator's type) to dst: in
	// predict_batch under float32 accumulation with the double API, dst
	// is a double holding a float value, and the addition is still a
	// float operation.
	addTo := func(dst, v string) string {
		if batch && g.at != g.ft {
			return fmt.Sprintf("%s = (%s)((%s)%s + %s);", dst, g.ft, g.at, dst, v)
		}
		return fmt.Sprintf("%s += %s;", dst, v)
	}
	// add adds the leaf lane l reached in tree t.
	add := func(l, t string) {
		full := func() {
			if k == 1 {
				w.line("%s", addTo(accOf(l)+"[0]", conv+g.name+"_leaf["+row(l)+"]"))
				return
			}
			w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
			w.line("\t%s", addTo(accOf(l)+"[j]", fmt.Sprintf("%s%s_leaf[(uint32_t)%s * %s_NUM_OUTPUTS + (uint32_t)j]", conv, g.name, row(l), g.upper)))
			w.line("}")
		}
		switch {
		case !tl.hasOut:
			full()
		case !tl.mixed:
			w.line("%s", addTo(fmt.Sprintf("%s[%s_out[%s]]", accOf(l), g.name, t), conv+g.name+"_leaf["+row(l)+"]"))
		default:
			w.line("if (%s_out[%s] < %s_NUM_OUTPUTS) {", g.name, t, g.upper)
			w.line("\t%s", addTo(fmt.Sprintf("%s[%s_out[%s]]", accOf(l), g.name, t), conv+g.name+"_leaf1["+row(l)+"]"))
			w.line("} else {")
			w.in()
			full()
			w.out()
			w.line("}")
		}
	}
	lanes := []string{"0", "1", "2", "3"}
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
			begin(l, fmt.Sprintf("(t + %du)", j))
		}
		w.line("while ((done0 & done1 & done2 & done3) == 0u) {")
		w.in()
		for _, l := range lanes {
			step(l)
		}
		w.out()
		w.line("}")
		for j, l := range lanes {
			add(l, fmt.Sprintf("t + %du", j))
		}
		w.out()
		w.line("}")
	}
	if T4 < T {
		w.line("for (t = %du; t < %du; t++) {", T4, T)
		w.in()
		begin("0", "t")
		w.line("while (done0 == 0u) {")
		w.in()
		step("0")
		w.out()
		w.line("}")
		add("0", "t")
		w.out()
		w.line("}")
	}
	g.batch = func(w *printer) {
		batch = true
		ft, nf, no := g.ft, g.upper+"_NUM_FEATURES", g.upper+"_NUM_OUTPUTS"
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
		w.line("/* Tree by tree, four rows walking at once, each lane taking the next row")
		w.line(" * as soon as its walk ends; each row's leaves are added in tree order, as")
		w.line(" * in %s_predict. */", g.name)
		w.line("for (t = 0; t < %du; t++) {", T)
		w.in()
		w.line("next = 0;")
		for _, l := range lanes {
			w.line("if (next < n) {")
			w.in()
			w.line("x%s = x + next * %s;", l, nf)
			w.line("o%s = outs + next * %s;", l, no)
			w.line("next++;")
			w.line("live%s = 1u;", l)
			begin(l, "t")
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
			step(l)
		}
		for _, l := range lanes {
			w.line("if ((done%s & live%s) != 0u) {", l, l)
			w.in()
			add(l, "t")
			w.line("if (next < n) {")
			w.in()
			w.line("x%s = x + next * %s;", l, nf)
			w.line("o%s = outs + next * %s;", l, no)
			w.line("next++;")
			begin(l, "t")
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
		w.out()
		w.line("}")
		batch = false
	}
	return nil
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
