package ctarget

import (
	"fmt"
	"math"
	"slices"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
)

// The binned layout. A row is first mapped to one small integer per used
// feature, its bin: the number of the feature's cuts that lie below the
// input. A feature's cuts are the distinct thresholds its splits compare
// with, each normalised to x <= c (x < t is x <= the next value below t in
// the target's type, exact for every non-NaN x; the next value below
// -FLT_MAX or -DBL_MAX is -infinity, which is a cut like any other). For
// every non-missing x and every cut c_k of its feature,
//
//	x <= c_k  exactly when  bin(x) <= k,
//
// so the trees compare integers. The bin is found by one binary search per
// used feature over the cuts' IEEE bit patterns turned into monotone
// unsigned keys (the sign bit set for positives, every bit inverted for
// negatives, −0 read as +0), so neither the mapping nor the walk needs a
// floating-point operation: an FPU-less core links no soft-float routine
// for them. A double build whose cuts all meet floats stores 4-byte float
// keys and rounds each input to a float on its bits first (binned32.go).
// NaN and the program's missing band give the bin MISS, all ones
// of the bin's type; a split whose missing values go left compares
// (bin+1) mod 2^bits with k+1, where MISS becomes 0 and goes left, and
// one whose missing values go right compares bin with k, where MISS is
// above every k. Zero-as-missing splits read a per-row flag set with the
// bin (|x| <= ZeroBound, also on keys).
//
// Splits are packed words in preorder as in the table layout (the left
// child is the next word, the left subtree's size in splits is stored, the
// leaf reached is counted on the way down and indexes the table layout's
// leaf tables), but the word holds feature, bin index, missing-left,
// zero-missing, the two leaf flags and the left subtree's size only, and
// is stored as the fewest bytes that hold it, split into aligned arrays of
// uint32_t, uint16_t and uint8_t (a 24-bit word is a uint16_t and a
// uint8_t array), so no access is unaligned on cores that fault on one.
//
// Not binned: set splits (a category test is not an interval test on
// one cut): Resolve writes such a model in the table layout instead and
// says so in the header, as bitvector does; a feature with more than maxBinCuts cuts, or a word beyond 64
// bits, which it refuses with an error. Auto never picks binned then.
type binnedLayout struct {
	tl *tableLayout // the leaves, tree starts and splits, as the table layout collects them
	// cuts holds per feature the sorted distinct keys of its cuts;
	// cutBase[f] is where feature f's start in the concatenation.
	cuts    [][]uint64
	cutBase []int
	keyBits int // 64 (double inputs) or 32 (float inputs, or double inputs rounded)
	// round is how a double input is rounded to a float before its key is
	// taken (binned32.go), or roundNone.
	round string
	// binBytes is the bin's type (1 or 2 bytes); miss its all-ones value.
	binBytes int
	miss     uint64
	fBits    int
	kBits    int
	aBits    int
	hasML    bool
	hasZM    bool
	// parts are the widths in bits of the arrays a word is stored in, low
	// bits first; words are the packed words.
	parts []int
	words []uint64
	// packBits, with Options.Pack, is the width of a packed word
	// (packbits.go), or 0: words stored in parts.
	packBits int
	// packedCuts, with Options.Pack, packs the cut keys (packcuts.go).
	packedCuts *cutPacking
	kLo        uint64 // missing band [kLo, kHi] as keys, when HasMissingValue
	kHi        uint64
	zLo        uint64 // zero band [zLo, zHi] as keys, when hasZM
	zHi        uint64
}

// maxBinCuts is the most cuts a feature may have: bins 0..n and MISS fit
// in 16 bits.
const maxBinCuts = 1<<16 - 2

// key64 is the monotone unsigned key of a double: key64(a) <= key64(b)
// exactly when a <= b, for all non-NaN a and b (−0 reads as +0).
func key64(v float64) uint64 {
	b := math.Float64bits(v)
	if b == 1<<63 {
		b = 0
	}
	if b>>63 != 0 {
		return ^b
	}
	return b | 1<<63
}

// key32 is key64 for a float.
func key32(v float32) uint32 {
	b := math.Float32bits(v)
	if b == 1<<31 {
		b = 0
	}
	if b>>31 != 0 {
		return ^b
	}
	return b | 1<<31
}

// key is the key of cut v in the type the cuts are stored in.
func (bl *binnedLayout) key(v float64) uint64 {
	if bl.keyBits == 32 {
		return uint64(key32(cut32(v, bl.round)))
	}
	return key64(v)
}

// bandKey is the key of a band's edge v in the input's type: double
// inputs are tested on their 64-bit key before they are rounded.
func (bl *binnedLayout) bandKey(g *gen, v float64) uint64 {
	if g.o.Float {
		return uint64(key32(float32(v)))
	}
	return key64(v)
}

// binnable reports why p cannot be binned, or nil: the first set split.
func binnable(p *compile.Program) error {
	for ti := range p.Trees {
		t := &p.Trees[ti]
		for i := range t.Nodes {
			if t.Nodes[i].IsSetSplit() {
				return &emit.Unsupported{Target: Name, Construct: emit.ConstructSetSplits + " in the binned layout",
					Where: fmt.Sprintf("tree %d, node %d", t.Source, t.Nodes[i].ID), Hint: "use --layout table (or auto)"}
			}
		}
	}
	return nil
}

// buildBinned lays p out binned: the table layout's leaves and splits, the
// cuts per feature, and the packed words.
func (g *gen) buildBinned() (*binnedLayout, error) {
	if err := binnable(g.p); err != nil {
		return nil, err
	}
	tl := &tableLayout{width: g.p.NumOutputs}
	g.tableLeaves(tl)
	tl.counts = g.leafCountsOf(tl)
	g.packCounts(tl)
	// A float32 model's double build has its cuts as floats (tl.round32)
	// and rounds its inputs to nearest; otherwise thresholds are in the
	// input's type.
	tl.round32 = !g.o.Float && g.p.Midpoints32
	splits, _ := g.tableSplits(tl)
	tl.scanSplits(splits)
	tl.leafFloat = tl.leafValuesFloat()
	bl := &binnedLayout{tl: tl, keyBits: 64, hasML: tl.hasML, hasZM: tl.hasZM}
	bl.chooseRound(g, splits)
	if g.o.Float || bl.round != roundNone {
		bl.keyBits = 32
	}
	index, err := bl.cutTables(g, splits)
	if err != nil {
		return nil, err
	}
	if err := bl.chooseWord(g, splits); err != nil {
		return nil, err
	}
	bl.pack(splits, index)
	bl.chooseCutPacking(g)
	tl.words = bl.words // the tree starts count them
	g.binnedLeaves(tl)
	bl.bands(g)
	return bl, nil
}

// cutOf is the cut of a numeric split: its normalised threshold, or
// -infinity for the x < t the table layout keeps a less-than bit for.
func cutOf(s tableSplit) float64 {
	if s.lt {
		return math.Inf(-1)
	}
	return s.thr
}

// cutTables collects each feature's distinct cut keys, sorted, and returns
// each cut's index within its feature.
func (bl *binnedLayout) cutTables(g *gen, splits []tableSplit) ([]map[uint64]int, error) {
	nf := len(g.p.Features)
	seen := make([]map[uint64]bool, nf)
	for _, s := range splits {
		if seen[s.feature] == nil {
			seen[s.feature] = map[uint64]bool{}
		}
		seen[s.feature][bl.key(cutOf(s))] = true
	}
	index := make([]map[uint64]int, nf)
	bl.cuts = make([][]uint64, nf)
	most := 0
	for f := range seen {
		keys := make([]uint64, 0, len(seen[f]))
		for k := range seen[f] {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		if len(keys) > maxBinCuts {
			return nil, fmt.Errorf("binned layout: feature %q has %d distinct thresholds, more than %d\nhint: use the table layout, or train with --max-bins",
				g.p.Features[f].Name, len(keys), maxBinCuts)
		}
		index[f] = map[uint64]int{}
		for i, k := range keys {
			index[f][k] = i
		}
		bl.cutBase = append(bl.cutBase, bl.numCuts())
		bl.cuts[f] = keys
		most = max(most, len(keys))
	}
	bl.cutBase = append(bl.cutBase, bl.numCuts())
	bl.binBytes = 1
	if most > 1<<8-2 {
		bl.binBytes = 2
	}
	bl.miss = 1<<(8*bl.binBytes) - 1
	bl.kBits = bitsFor(most - 1)
	return index, nil
}

// numCuts is the number of cuts collected so far.
func (bl *binnedLayout) numCuts() int {
	n := 0
	for _, c := range bl.cuts {
		n += len(c)
	}
	return n
}

// chooseWord sizes the word's fields and the arrays it is stored in.
func (bl *binnedLayout) chooseWord(g *gen, splits []tableSplit) error {
	maxLeft := 0
	for _, s := range splits {
		maxLeft = max(maxLeft, s.leftCount)
	}
	bl.fBits = bitsFor(len(g.p.Features) - 1)
	bl.aBits = bitsFor(maxLeft)
	n := bl.aShift() + bl.aBits
	if n > 64 {
		return fmt.Errorf("binned layout: a split needs %d bits, more than 64 (%d features, %d cuts, left subtrees of %d splits)\nhint: use the table layout",
			n, len(g.p.Features), bl.numCuts(), maxLeft)
	}
	bl.parts = wordParts((n + 7) / 8)
	if g.o.Pack && packable(len(splits), n) && packedBytes(len(splits), n) < len(splits)*bl.wordBits()/8 {
		bl.packBits = n
	}
	return nil
}

// wordParts splits a word of n bytes into aligned arrays, widest first:
// 3 bytes are a uint16_t and a uint8_t, 8 one uint64_t.
func wordParts(n int) []int {
	if n == 8 {
		return []int{64}
	}
	var parts []int
	for _, w := range []int{4, 2, 1} {
		if n >= w {
			parts = append(parts, 8*w)
			n -= w
		}
	}
	if len(parts) == 0 {
		parts = []int{8} // a word of no bits (one feature, one cut, leaves only)
	}
	return parts
}

func (bl *binnedLayout) kShift() int  { return bl.fBits }
func (bl *binnedLayout) mlShift() int { return bl.fBits + bl.kBits }
func (bl *binnedLayout) zmShift() int { return bl.mlShift() + b2i(bl.hasML) }
func (bl *binnedLayout) llShift() int { return bl.zmShift() + b2i(bl.hasZM) }
func (bl *binnedLayout) aShift() int  { return bl.llShift() + 2 }

// wordBits is the width of the packed word in use.
func (bl *binnedLayout) wordBits() int {
	n := 0
	for _, p := range bl.parts {
		n += p
	}
	return n
}

// pack packs every split into its word.
func (bl *binnedLayout) pack(splits []tableSplit, index []map[uint64]int) {
	for _, s := range splits {
		k := index[s.feature][bl.key(cutOf(s))]
		w := uint64(s.feature) | uint64(k)<<bl.kShift() | uint64(s.leftCount)<<bl.aShift()
		if s.ml {
			w |= 1 << bl.mlShift()
		}
		if s.zm {
			w |= 1 << bl.zmShift()
		}
		if s.ll {
			w |= 1 << bl.llShift()
		}
		if s.rl {
			w |= 2 << bl.llShift()
		}
		bl.words = append(bl.words, w)
	}
}

// binnedLeaves decides, as the table layout does, whether leaf vectors are
// stored per leaf or as rows of the distinct ones.
func (g *gen) binnedLeaves(tl *tableLayout) {
	nRows := len(tl.leafRows.vecs)
	if tl.mixed {
		nRows = max(nRows, len(tl.rows1.vecs))
	}
	nLeaves, k, vb := len(tl.leafOf), tl.width, tl.leafElemBytes(g)
	tl.direct = !tl.mixed && nLeaves*k*vb <= packedLeafRowBytes(nLeaves, nRows, g.o.Pack)+tl.rowTableBytes(g, nRows)
	tl.dropPackedCounts()
}

// bands turns the missing band and the zero band into keys.
func (bl *binnedLayout) bands(g *gen) {
	p := g.p
	if p.HasMissingValue {
		bl.kLo, bl.kHi = bl.bandKey(g, p.MissingLo), bl.bandKey(g, p.MissingHi)
	}
	if bl.hasZM {
		bl.zLo, bl.zHi = bl.bandKey(g, -p.ZeroBound), bl.bandKey(g, p.ZeroBound)
	}
}

// binned writes the binned layout's tables and NAME_predict.
func (g *gen) binned(w *printer) error {
	bl, err := g.buildBinned()
	if err != nil {
		return err
	}
	t := newTableWriter(g, bl.tl, w)
	if bl.packBits > 0 || bl.packedCuts != nil || bl.tl.usesPacking(g) {
		g.writeFieldFunc(w)
	}
	bl.writeWords(g, w)
	t.treeStarts()
	bl.writeCuts(g, w)
	t.outputsAndLeaves()
	if g.o.ConstantTime {
		bl.writeConstantTime(g, t, w)
		return nil
	}
	bl.writeKey(g, w)
	bl.writeBins(g, w)
	bl.writePredict(g, t, w)
	return nil
}

// writeWords writes the split words, one array per part.
func (bl *binnedLayout) writeWords(g *gen, w *printer) {
	w.line("/* Splits, per tree in preorder, low bits first: feature (%s), cut index (%s)%s%s,", nbits(bl.fBits), nbits(bl.kBits),
		map[bool]string{true: ", missing goes left (1 bit)"}[bl.hasML], map[bool]string{true: ", zero is missing (1 bit)"}[bl.hasZM])
	w.line(" * left is a leaf (1 bit), right is a leaf (1 bit), splits in the left subtree (%s);", nbits(bl.aBits))
	if bl.packBits > 0 {
		bl.writePackedWords(g, w)
		return
	}
	w.line(" * %d bits a split, stored in %s. */", bl.wordBits(), bl.partNames(g))
	n := max(len(bl.words), 1) // C has no empty arrays
	shift := 0
	for pi, pb := range bl.parts {
		w.line("static const uint%d_t %s_node%d[%d] = {", pb, g.name, pi, n)
		mask := uint64(1)<<pb - 1
		if pb == 64 {
			mask = math.MaxUint64
		}
		g.numbers(w, len(bl.words), func(i int) string { return hexLit(bl.words[i] >> shift & mask) })
		if len(bl.words) == 0 {
			w.line("\t0")
		}
		w.line("};")
		g.tables = append(g.tables, Table{fmt.Sprintf("%s_node%d", g.name, pi), fmt.Sprintf("split words, bits %d-%d", shift, shift+pb-1), n, pb / 8})
		shift += pb
	}
	w.line("")
}

// partNames names the word's arrays.
func (bl *binnedLayout) partNames(g *gen) string {
	s := ""
	for pi, pb := range bl.parts {
		if pi > 0 {
			s += " and "
		}
		s += fmt.Sprintf("%s_node%d (uint%d_t)", g.name, pi, pb)
	}
	return s
}

// writeCuts writes the cut keys and where each feature's start.
func (bl *binnedLayout) writeCuts(g *gen, w *printer) {
	n := bl.numCuts()
	kt := fmt.Sprintf("uint%d_t", bl.keyBits)
	if bl.packedCuts != nil {
		bl.writeCutBase(g, w)
		bl.writePackedCuts(g, w)
		return
	}
	w.line("/* Cuts, by feature, as ascending keys: the IEEE bits of the %s, the sign bit", g.ft)
	w.line(" * set when it is clear and every bit inverted when it is set (so keys order as")
	w.line(" * the values do), -0 read as +0. */")
	w.line("static const %s %s_cut[%d] = {", kt, g.name, max(n, 1))
	var all []uint64
	for _, c := range bl.cuts {
		all = append(all, c...)
	}
	g.numbers(w, n, func(i int) string { return bl.keyLit(all[i]) })
	if n == 0 {
		w.line("\t0")
	}
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_cut", "cut keys", max(n, 1), bl.keyBits / 8})
	w.line("")
	bl.writeCutBase(g, w)
}

// writeCutBase writes where each feature's cuts start.
func (bl *binnedLayout) writeCutBase(g *gen, w *printer) {
	cb := intBytes(bl.numCuts())
	w.line("/* First cut of each feature; feature f has cuts cut_base[f] to cut_base[f+1]-1. */")
	w.line("static const %s %s_cut_base[%d] = {", uintType(cb), g.name, len(bl.cutBase))
	g.numbers(w, len(bl.cutBase), func(i int) string { return fmt.Sprint(bl.cutBase[i]) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_cut_base", "first cut per feature", len(bl.cutBase), cb})
	w.line("")
}

// keyLit is a key as a C constant of the key type.
func (bl *binnedLayout) keyLit(k uint64) string { return bitsLit(k, bl.keyBits) }

// bitsLit is k as a C constant of uint<bits>_t.
func bitsLit(k uint64, bits int) string {
	if bits == 64 {
		return fmt.Sprintf("0x%016xull", k)
	}
	return fmt.Sprintf("0x%08xu", k)
}

// writeBitsFunc writes NAME_bits, which reads an input's bits as the
// unsigned integer type kt of its width.
func (g *gen) writeBitsFunc(w *printer, kt string) {
	w.line("/* The bits of v: memcpy is the conversion C defines (no floating-point operation). */")
	w.line("static %s %s_bits(const %s *v)", kt, g.name, g.ft)
	w.line("{")
	w.line("\t%s b;", kt)
	w.line("\tmemcpy(&b, v, sizeof b);")
	w.line("\treturn b;")
	w.line("}")
	w.line("")
}

// writeKey writes NAME_key, the key of an input that is not NaN, and
// NAME_is_nan; both read the input's bits, never compare it as a float.
func (bl *binnedLayout) writeKey(g *gen, w *printer) {
	kt := fmt.Sprintf("uint%d_t", bl.inBits(g))
	sign, abs, inf := "0x8000000000000000ull", "0x7fffffffffffffffull", "0x7ff0000000000000ull"
	if bl.inBits(g) == 32 {
		sign, abs, inf = "0x80000000u", "0x7fffffffu", "0x7f800000u"
	}
	g.writeBitsFunc(w, kt)
	w.line("/* Whether bits b are a NaN: all exponent bits set and a fraction. */")
	w.line("static int %s_is_nan(%s b)", g.name, kt)
	w.line("{")
	w.line("\treturn (b & %s) > %s;", abs, inf)
	w.line("}")
	w.line("")
	if !bl.needKey(g) {
		bl.writeRound32(g, w)
		bl.writeKey32(g, w)
		return
	}
	w.line("/* The key of bits b that are not a NaN: keys order as the values do. */")
	w.line("static %s %s_key(%s b)", kt, g.name, kt)
	w.line("{")
	w.line("\tif (b == %s) {", sign)
	w.line("\t\tb = 0; /* -0 is +0 to every comparison */")
	w.line("\t}")
	w.line("\treturn (b & %s) != 0 ? ~b : b | %s;", sign, sign)
	w.line("}")
	w.line("")
	if bl.round != roundNone {
		bl.writeRound32(g, w)
		bl.writeKey32(g, w)
	}
}

// needKey reports whether NAME_bins takes the key of the input's own
// bits: always, but for a rounded double build without bands.
func (bl *binnedLayout) needKey(g *gen) bool {
	return bl.round == roundNone || g.p.HasMissingValue || bl.hasZM
}

// inBits is the width of the input's bits: 64 for double, 32 for float.
func (bl *binnedLayout) inBits(g *gen) int {
	if g.o.Float {
		return 32
	}
	return 64
}

// binType is the C type of a bin.
func (bl *binnedLayout) binType() string { return uintType(bl.binBytes) }

// writeBins writes NAME_bins: every feature's bin (and zero flag) for a
// row, by one binary search per feature with cuts.
func (bl *binnedLayout) writeBins(g *gen, w *printer) {
	p := g.p
	kt := fmt.Sprintf("uint%d_t", bl.inBits(g))
	zm := ""
	if bl.hasZM {
		zm = ", uint8_t *zero"
	}
	w.line("/* The bin of each feature of x: the number of its cuts below x[f], or %s", hexLit(bl.miss))
	w.line(" * when x[f] is missing%s. */", map[bool]string{true: "; zero[f] is 1 when x[f] is in the zero band"}[bl.hasZM])
	w.line("static void %s_bins(const %s *x, %s *bin%s)", g.name, g.ft, bl.binType(), zm)
	w.line("{")
	w.in()
	w.line("uint32_t f;")
	w.line("for (f = 0; f < %s_NUM_FEATURES; f++) {", g.upper)
	w.in()
	w.line("uint32_t lo = %s_cut_base[f], hi = %s_cut_base[f + 1u];", g.name, g.name)
	w.line("const uint32_t first = lo;")
	w.line("const %s b = %s_bits(&x[f]);", kt, g.name)
	if bl.needKey(g) {
		w.line("%s k;", kt)
	}
	if bl.hasZM {
		w.line("zero[f] = 0;")
	}
	w.line("if (lo == hi) {")
	w.line("\tbin[f] = 0; /* no split reads it */")
	w.line("\tcontinue;")
	w.line("}")
	w.line("if (%s_is_nan(b)) {", g.name)
	w.line("\tbin[f] = %s;", hexLit(bl.miss))
	w.line("\tcontinue;")
	w.line("}")
	if bl.needKey(g) {
		w.line("k = %s_key(b);", g.name)
	}
	if p.HasMissingValue {
		w.line("if (k >= %s && k <= %s) { /* the missing band */", bitsLit(bl.kLo, bl.inBits(g)), bitsLit(bl.kHi, bl.inBits(g)))
		w.line("\tbin[f] = %s;", hexLit(bl.miss))
		w.line("\tcontinue;")
		w.line("}")
	}
	if bl.hasZM {
		w.line("zero[f] = (uint8_t)(k >= %s && k <= %s);", bitsLit(bl.zLo, bl.inBits(g)), bitsLit(bl.zHi, bl.inBits(g)))
	}
	ck := "k"
	if bl.round != roundNone {
		w.line("const uint32_t k32 = %s_key32(%s_round32(b));", g.name, g.name)
		ck = "k32"
	}
	w.line("while (lo < hi) { /* the first cut not below k */")
	w.line("\tconst uint32_t mid = lo + ((hi - lo) >> 1);")
	cut := fmt.Sprintf("%s_cut[mid]", g.name)
	if bl.packedCuts != nil {
		cut = fmt.Sprintf("%s_cut_at(f, mid)", g.name)
	}
	w.line("\tif (%s < %s) {", cut, ck)
	w.line("\t\tlo = mid + 1u;")
	w.line("\t} else {")
	w.line("\t\thi = mid;")
	w.line("\t}")
	w.line("}")
	w.line("bin[f] = (%s)(lo - first);", bl.binType())
	w.out()
	w.line("}")
	w.out()
	w.line("}")
	w.line("")
}

// wordExpr reads word i from its arrays, aligned loads only.
func (bl *binnedLayout) wordExpr(g *gen) string {
	if bl.packBits > 0 {
		return fmt.Sprintf("%s_field(%s_node, i * %du, %du)", g.name, g.name, bl.packBits, bl.packBits)
	}
	wt := "uint32_t"
	if bl.wordBits() > 32 {
		wt = "uint64_t"
	}
	s, shift := "", 0
	for pi, pb := range bl.parts {
		term := fmt.Sprintf("(%s)%s_node%d[i]", wt, g.name, pi)
		if shift > 0 {
			term = fmt.Sprintf("(%s << %d)", term, shift)
		}
		if pi > 0 {
			s += " | "
		}
		s += term
		shift += pb
	}
	return s
}

// field is the C expression of a field of w.
func binField(shift, width int) string {
	if width == 0 {
		return "0u"
	}
	return fmt.Sprintf("((uint32_t)(w >> %d) & %s)", shift, hexLit(1<<width-1))
}

// writePredict writes NAME_predict: the bins, then each tree walked in
// integers, its leaf added in tree order.
func (bl *binnedLayout) writePredict(g *gen, t *tableWriter, w *printer) {
	wt := bl.predictOpen(g, w)
	w.line("uint32_t i = %s_start[t];", g.name)
	w.line("uint32_t at0 = i + t; /* leaves before the tree: one more than splits, per tree */")
	w.line("if (i < %s_start[t + 1u]) { /* a tree that is one leaf has no word */", g.name)
	w.in()
	w.line("for (;;) {")
	w.in()
	bl.stepFields(g, w, wt)
	if bl.hasML {
		w.line("const uint32_t ml = %s;", binField(bl.mlShift(), 1))
		w.line("/* missing (bin all ones) goes left: bin+1 wraps to 0 */")
		w.line("uint32_t r = (uint32_t)(((b + ml) & %s) > k + ml); /* 1: right */", hexLit(bl.miss))
	} else {
		w.line("uint32_t r = (uint32_t)(b > k); /* 1: right; missing (bin all ones) too */")
	}
	if bl.hasZM {
		ml := "1u"
		if bl.hasML {
			ml = "(ml ^ 1u)"
		}
		w.line("if (%s != 0u && zero[%s] != 0u) {", binField(bl.zmShift(), 1), binField(0, bl.fBits))
		w.line("\tr = %s; /* zero counts as missing here */", ml)
		w.line("}")
	}
	w.line("at0 += r * (p1 + 1u); /* p1 is 0 when the left child is a leaf */")
	w.line("if (((uint32_t)(w >> (%du + r)) & 1u) != 0u) {", bl.llShift())
	w.line("\tbreak; /* the child is a leaf */")
	w.line("}")
	w.line("i += 1u + r * p1;")
	w.out()
	w.line("}")
	w.out()
	w.line("}")
	t.add("0", "t")
	w.out()
	w.line("}")
}

// predictOpen opens NAME_predict as both binned walks do (this one and the
// constant-time one): the locals, the bins, the loop over the trees. It
// returns the C type of a split word.
func (bl *binnedLayout) predictOpen(g *gen, w *printer) string {
	wt := "uint32_t"
	if bl.wordBits() > 32 {
		wt = "uint64_t"
	}
	locals := []string{fmt.Sprintf("%s bin[%s_NUM_FEATURES];", bl.binType(), g.upper), "uint32_t t;"}
	args := ""
	if bl.hasZM {
		locals = append(locals, fmt.Sprintf("uint8_t zero[%s_NUM_FEATURES];", g.upper))
		args = ", zero"
	}
	g.predictStart(w, locals...)
	w.line("%s_bins(x, bin%s);", g.name, args)
	w.line("for (t = 0; t < %du; t++) {", len(g.p.Trees))
	w.in()
	return wt
}

// stepFields reads split word i of type wt and its fields: the feature's
// bin b, the cut index k, the left subtree's size p1.
func (bl *binnedLayout) stepFields(g *gen, w *printer, wt string) {
	w.line("const %s w = %s;", wt, bl.wordExpr(g))
	w.line("const uint32_t b = bin[%s];", binField(0, bl.fBits))
	w.line("const uint32_t k = %s;", binField(bl.kShift(), bl.kBits))
	w.line("const uint32_t p1 = %s; /* splits in the left subtree */", binField(bl.aShift(), bl.aBits))
}
