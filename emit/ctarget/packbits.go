package ctarget

import (
	"fmt"
	"slices"
)

// Packed bits (Options.Pack). The table and binned layouts store a split
// word in the narrowest of 16, 24, 32 or 64 bits that holds it, a leaf's
// row in 1, 2, 4, 8 or 16 bits and a class count in 8 or 16. With Pack
// they are stored at the width the model needs, back to back in arrays of
// uint32_t, low bits first:
//
//   - NAME_node: each split word in exactly the bits its fields take;
//   - NAME_leaf_row: each leaf's row in bitsFor(rows-1) bits;
//   - NAME_leaf (class counts): the rows reordered so that the rows whose
//     counts all fit in w1 bits come first, K of them, each count in w1
//     bits, then the others, each count in w2 bits (w1 and w2 chosen per
//     model, the fewest bytes).
//
// NAME_field reads a field with two aligned 32-bit loads and shifts (Cortex-M0
// and M0+ fault on unaligned loads, ARMv6-M Architecture Reference Manual
// A3.2; no 64-bit shift, so no library call on ARMv6-M). Every packed array
// ends with one spare word, so the second load of the last field reads a word
// that exists. A field is at most 32 bits wide; a model whose split word
// needs more is stored unpacked, as is one whose arrays would pass 2^32 bits.
// The price is a few instructions per field read (DEVELOPERS.md, "C bytes
// per node", has the instruction counts).

// maxPackedBits is the most bits a packed array may hold: positions are
// uint32_t.
const maxPackedBits = 1<<32 - 64

// bitStream appends fields of given widths into 32-bit words, low bits first.
type bitStream struct {
	words []uint32
	n     int // bits written
}

// put appends the low width bits of v (width <= 64).
func (b *bitStream) put(v uint64, width int) {
	for width > 0 {
		if b.n%32 == 0 {
			b.words = append(b.words, 0)
		}
		s := b.n % 32
		take := min(width, 32-s)
		b.words[len(b.words)-1] |= uint32(v&(1<<take-1)) << s
		v >>= take
		width -= take
		b.n += take
	}
}

// get reads the width bits at pos (width <= 32), as NAME_field does.
func (b *bitStream) get(pos, width int) uint32 {
	q, s := pos/32, pos%32
	lo := b.at(q) >> s
	hi := (b.at(q+1) << 1) << (31 - s)
	return (lo | hi) & (0xffffffff >> (32 - width))
}

func (b *bitStream) at(q int) uint32 {
	if q < len(b.words) {
		return b.words[q]
	}
	return 0
}

// padded is the stream's words and one spare word.
func (b *bitStream) padded() []uint32 { return append(slices.Clone(b.words), 0) }

// packedBytes is what n fields of width bits take packed, the spare word
// included.
func packedBytes(n, width int) int { return 4 * ((n*width+31)/32 + 1) }

// packable reports whether n fields of width bits can be packed.
func packable(n, width int) bool { return width >= 1 && width <= 32 && n*width <= maxPackedBits }

// writeFieldFunc writes NAME_field, the reader of packed arrays.
func (g *gen) writeFieldFunc(w *printer) {
	if g.fieldWritten {
		return
	}
	g.fieldWritten = true
	w.line("/* Bits pos to pos+width-1 (1 <= width <= 32) of the packed array a, low bits")
	w.line(" * first: two aligned 32-bit loads (cores that fault on an unaligned load read")
	w.line(" * it too); the array ends with a spare word for the second load. */")
	w.line("static uint32_t %s_field(const uint32_t *a, uint32_t pos, uint32_t width)", g.name)
	w.line("{")
	w.line("\tconst uint32_t q = pos >> 5, s = pos & 31u;")
	w.line("\tconst uint32_t lo = a[q] >> s;")
	w.line("\tconst uint32_t hi = (a[q + 1u] << 1) << (31u - s); /* 0 when s is 0 */")
	w.line("\treturn (lo | hi) & (0xffffffffu >> (32u - width));")
	w.line("}")
	w.line("")
}

// writePacked writes a packed array of uint32_t named name and records it.
func (g *gen) writePacked(w *printer, name, what string, b *bitStream) {
	ws := b.padded()
	w.line("static const uint32_t %s[%d] = {", name, len(ws))
	g.numbers(w, len(ws), func(i int) string { return fmt.Sprintf("0x%08xu", ws[i]) })
	w.line("};")
	g.tables = append(g.tables, Table{name, what, len(ws), 4})
	w.line("")
}

// packedCounts is the class-count table packed in two tiers: rows 0..k1-1
// with each count in w1 bits, then the others with each count in w2 bits.
type packedCounts struct {
	k1, w1, w2 int
}

// choosePackedCounts orders rows (their counts, of width k classes) so that
// the rows of small counts come first and picks the tier widths that take
// the fewest bits. It returns the order (new row i is old row order[i]).
func choosePackedCounts(rows [][]uint32) (packedCounts, []int) {
	need := func(c []uint32) int {
		m := uint32(0)
		for _, x := range c {
			m = max(m, x)
		}
		return max(bitsFor(int(m)), 1)
	}
	order := make([]int, len(rows))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return need(rows[a]) - need(rows[b]) })
	k := 0
	if len(rows) > 0 {
		k = len(rows[0])
	}
	w2 := 1
	for _, c := range rows {
		w2 = max(w2, need(c))
	}
	best := packedCounts{k1: len(rows), w1: w2, w2: w2}
	bestBits := len(rows) * k * w2
	for w1 := 1; w1 < w2; w1++ {
		k1 := 0
		for k1 < len(order) && need(rows[order[k1]]) <= w1 {
			k1++
		}
		if b := k1*k*w1 + (len(rows)-k1)*k*w2; b < bestBits {
			best, bestBits = packedCounts{k1: k1, w1: w1, w2: w2}, b
		}
	}
	return best, order
}

// bytes is what the packed counts of n rows of k classes take.
func (pc packedCounts) bytes(n, k int) int {
	return 4 * ((pc.k1*k*pc.w1+(n-pc.k1)*k*pc.w2+31)/32 + 1)
}

// stream packs the count rows.
func (pc packedCounts) stream(rows [][]uint32) *bitStream {
	b := &bitStream{}
	for r, c := range rows {
		wd := pc.w2
		if r < pc.k1 {
			wd = pc.w1
		}
		for _, x := range c {
			b.put(uint64(x), wd)
		}
	}
	return b
}

// reorderRows puts tl's leaf rows and their counts in the order given (new
// row i is old row order[i]); called before the splits are collected, so
// every row number written later is a new one.
func (tl *tableLayout) reorderRows(order []int) {
	lr := tl.leafRows
	vecs := make([][]float64, len(order))
	cnt := make([][]uint32, len(order))
	for i, o := range order {
		vecs[i] = lr.vecs[o]
		cnt[i] = tl.counts.rows[o]
		lr.index[vecKey(vecs[i])] = i
	}
	lr.vecs, tl.counts.rows = vecs, cnt
}

// packCounts, with Pack and counts as leaves, orders the rows and chooses
// the count tiers, when that takes fewer bytes than whole counts.
func (g *gen) packCounts(tl *tableLayout) {
	lc := tl.counts
	if !g.o.Pack || lc == nil || len(lc.rows) == 0 {
		return
	}
	pc, order := choosePackedCounts(lc.rows)
	n, k := len(lc.rows), tl.width
	if !packable(1, pc.w2) || n*k*pc.w2 > maxPackedBits || pc.bytes(n, k) >= n*k*lc.bytes {
		return
	}
	tl.reorderRows(order)
	lc.packed = &pc
}

// writePackedCounts writes NAME_leaf as packed count rows.
func (t *tableWriter) writePackedCounts() {
	g, tl, w, pc := t.g, t.tl, t.w, t.tl.counts.packed
	n := len(tl.counts.rows)
	w.line("/* Distinct leaf rows as class counts c_j (the value of class j is c_j divided by")
	w.line(" * the counts' sum), packed: rows 0 to %d with each count in %s, then rows %d to %d", pc.k1-1, nbits(pc.w1), pc.k1, n-1)
	w.line(" * with each count in %s (read by %s_field). */", nbits(pc.w2), g.name)
	g.writePacked(w, g.name+"_leaf", fmt.Sprintf("class counts, %d rows in %s a count, %d in %s", pc.k1, nbits(pc.w1), n-pc.k1, nbits(pc.w2)), pc.stream(tl.counts.rows))
}

// packedCountReads writes the declarations that find row row's counts in
// the packed NAME_leaf: cw, the width of a count, and cpos, the bit
// position of its first.
func (t *tableWriter) packedCountReads(row string) {
	w, pc, k := t.w, t.tl.counts.packed, t.tl.width
	w.line("const uint32_t crow = %s;", row)
	w.line("const uint32_t cw = crow < %du ? %du : %du; /* bits a count */", pc.k1, pc.w1, pc.w2)
	w.line("const uint32_t cpos = crow < %du ? crow * %du : %du + (crow - %du) * %du;", pc.k1, k*pc.w1, pc.k1*k*pc.w1, pc.k1, k*pc.w2)
}

// packedLeafRowBits is the width of a packed leaf row, 0 when leaf rows
// are not packed (no Pack, or 16 rows or fewer: leafrows.go packs those
// within bytes already).
func (tl *tableLayout) packedLeafRowBits(pack bool) int {
	n := tl.maxRows()
	if !pack || leafRowBits(n) > 0 {
		return 0
	}
	b := bitsFor(n - 1)
	if !packable(len(tl.leafOf), b) || b%8 == 0 {
		return 0 // whole bytes already
	}
	return b
}

// packedLeafRowBytes is leafRowBytes with Pack.
func packedLeafRowBytes(nLeaves, nRows int, pack bool) int {
	if pack && leafRowBits(nRows) == 0 {
		if b := bitsFor(nRows - 1); b%8 != 0 && packable(nLeaves, b) {
			return packedBytes(nLeaves, b)
		}
	}
	return leafRowBytes(nLeaves, nRows)
}

// writePackedLeafRows writes NAME_leaf_row packed at b bits a leaf.
func (t *tableWriter) writePackedLeafRows(b int) {
	g, tl, w := t.g, t.tl, t.w
	s := &bitStream{}
	for _, r := range tl.leafOf {
		s.put(uint64(r), b)
	}
	w.line("/* Per leaf in preorder, its row of %s_leaf in %s, packed (read by %s_field). */", g.name, nbits(b), g.name)
	g.writePacked(w, g.name+"_leaf_row", fmt.Sprintf("leaf row per leaf, %s each, packed", nbits(b)), s)
}

// rowTableBytes is what the table of nRows distinct leaf rows takes.
func (tl *tableLayout) rowTableBytes(g *gen, nRows int) int {
	if tl.counts != nil && tl.counts.packed != nil {
		return tl.counts.packed.bytes(nRows, tl.width)
	}
	return nRows * tl.width * tl.leafElemBytes(g)
}

// wordTableBytes is what n split words of bits bits take: in the narrowest
// unsigned type, or with pack packed when that is smaller.
func wordTableBytes(n, bits int, pack bool) int {
	b := n * wordBits(bits) / 8
	if pack && packable(n, bits) {
		b = min(b, packedBytes(n, bits))
	}
	return b
}

// usedBits is the width of the table layout's split word in use.
func (tl *tableLayout) usedBits() int {
	n := tl.p1Shift() + tl.p1Bits
	if tl.inWord {
		n += tl.p2Bits
	}
	return n
}

// choosePackedWord packs the split words, with Pack, where that is smaller.
func (tl *tableLayout) choosePackedWord(g *gen) {
	n, b := len(tl.words), tl.usedBits()
	if g.o.Pack && packable(n, b) && packedBytes(n, b) < n*tl.wordBits/8 {
		tl.packBits = b
	}
}

// dropPackedCounts keeps the counts whole where leaf vectors are stored
// per leaf (tl.direct): that table is indexed by leaf, not packed.
func (tl *tableLayout) dropPackedCounts() {
	if tl.direct && tl.counts != nil {
		tl.counts.packed = nil
	}
}

// usesPacking reports whether some array of tl is packed, so NAME_field
// is needed.
func (tl *tableLayout) usesPacking(g *gen) bool {
	rowsPacked := !tl.inWord && !tl.direct && tl.packedLeafRowBits(g.o.Pack) > 0
	return tl.packBits > 0 || tl.counts != nil && tl.counts.packed != nil || rowsPacked
}

// writePackedWords writes NAME_node as the split words packed at
// tl.packBits bits each.
func (t *tableWriter) writePackedWords() {
	g, tl, w := t.g, t.tl, t.w
	s := &bitStream{}
	for _, x := range tl.words {
		s.put(x, tl.packBits)
	}
	w.line("/* The split words packed, %s each, word i at bit i*%d (read by %s_field). */", nbits(tl.packBits), tl.packBits, g.name)
	g.writePacked(w, g.name+"_node", fmt.Sprintf("split words, %s each, packed", nbits(tl.packBits)), s)
}

// writePackedWords writes the binned layout's NAME_node, the split words
// packed at bl.packBits bits each.
func (bl *binnedLayout) writePackedWords(g *gen, w *printer) {
	s := &bitStream{}
	for _, x := range bl.words {
		s.put(x, bl.packBits)
	}
	w.line(" * packed, %s each, word i at bit i*%d (read by %s_field). */", nbits(bl.packBits), bl.packBits, g.name)
	g.writePacked(w, g.name+"_node", fmt.Sprintf("split words, %s each, packed", nbits(bl.packBits)), s)
}
