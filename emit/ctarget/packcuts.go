package ctarget

import (
	"fmt"
	"math/bits"
)

// Packed cuts (Options.Pack, the binned layout). A feature's cut keys are
// sorted and lie close together in key space: a double feature whose cuts
// span a few binades differs from its least cut only in the low 52 to 56
// bits of the key. With Pack, each feature stores its least key whole
// (NAME_cut_lo) and every cut as its offset from it, in the bits the
// feature's largest offset needs (NAME_cut_w), packed (NAME_cut, feature f
// from bit NAME_cut_pos[f]); NAME_cut_at adds them back. Integer
// arithmetic only, exact: key = lo + offset. Not with ConstantTime, whose
// search reads NAME_cut directly; and only where it takes fewer bytes.

// cutPacking is the packed cuts' layout: per feature the width of its
// offsets and the bit its first starts at.
type cutPacking struct {
	width []int
	pos   []int
	bits  int // all offsets
}

// chooseCutPacking packs the cuts when Pack asks and that is smaller.
func (bl *binnedLayout) chooseCutPacking(g *gen) {
	if !g.o.Pack || g.o.ConstantTime || bl.numCuts() == 0 {
		return
	}
	cp := &cutPacking{}
	for _, c := range bl.cuts {
		w := 1
		if len(c) > 0 {
			w = max(1, bits.Len64(c[len(c)-1]-c[0]))
		}
		cp.width = append(cp.width, w)
		cp.pos = append(cp.pos, cp.bits)
		cp.bits += w * len(c)
	}
	if cp.bits > maxPackedBits {
		return
	}
	nf, kb := len(bl.cuts), bl.keyBits/8
	packed := 4*((cp.bits+31)/32+1) + nf*(kb+4+1)
	if packed < bl.numCuts()*kb {
		bl.packedCuts = cp
	}
}

// writePackedCuts writes NAME_cut_lo, NAME_cut_w, NAME_cut_pos and the
// packed offsets NAME_cut, and NAME_cut_at, which reads cut c of feature f.
func (bl *binnedLayout) writePackedCuts(g *gen, w *printer) {
	cp, nf := bl.packedCuts, len(bl.cuts)
	kt := fmt.Sprintf("uint%d_t", bl.keyBits)
	w.line("/* Cuts, by feature, as ascending keys: the IEEE bits of the %s, the sign bit", g.ft)
	w.line(" * set when it is clear and every bit inverted when it is set (so keys order as")
	w.line(" * the values do), -0 read as +0; packed: each feature's least key (cut_lo),")
	w.line(" * then every cut as its offset from it in cut_w[f] bits, feature f's from bit")
	w.line(" * cut_pos[f] of %s_cut. */", g.name)
	w.line("static const %s %s_cut_lo[%d] = {", kt, g.name, nf)
	g.numbers(w, nf, func(f int) string {
		if len(bl.cuts[f]) == 0 {
			return bl.keyLit(0)
		}
		return bl.keyLit(bl.cuts[f][0])
	})
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_cut_lo", "least cut key per feature", nf, bl.keyBits / 8})
	w.line("static const uint8_t %s_cut_w[%d] = {", g.name, nf)
	g.numbers(w, nf, func(f int) string { return fmt.Sprintf("%du", cp.width[f]) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_cut_w", "bits of a cut offset per feature", nf, 1})
	w.line("static const uint32_t %s_cut_pos[%d] = {", g.name, nf)
	g.numbers(w, nf, func(f int) string { return fmt.Sprintf("%du", cp.pos[f]) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_cut_pos", "first bit of a feature's cut offsets", nf, 4})
	s := &bitStream{}
	for f, c := range bl.cuts {
		for _, k := range c {
			off, wd := k-c[0], cp.width[f]
			s.put(off&(1<<min(wd, 32)-1), min(wd, 32))
			if wd > 32 {
				s.put(off>>32, wd-32)
			}
		}
	}
	g.writePacked(w, g.name+"_cut", "cut key offsets, packed", s)
	bl.writeCutAt(g, w, kt)
}

// writeCutAt writes NAME_cut_at: the key of cut c (an index of all cuts)
// of feature f.
func (bl *binnedLayout) writeCutAt(g *gen, w *printer, kt string) {
	w.line("/* The key of cut c of feature f (c counts all features' cuts). */")
	w.line("static %s %s_cut_at(uint32_t f, uint32_t c)", kt, g.name)
	w.line("{")
	w.line("\tconst uint32_t wd = %s_cut_w[f];", g.name)
	w.line("\tconst uint32_t pos = %s_cut_pos[f] + (c - (uint32_t)%s_cut_base[f]) * wd;", g.name, g.name)
	if bl.keyBits == 32 {
		w.line("\treturn %s_cut_lo[f] + %s_field(%s_cut, pos, wd);", g.name, g.name, g.name)
	} else {
		w.line("\tconst uint64_t lo = %s_field(%s_cut, pos, wd < 32u ? wd : 32u);", g.name, g.name)
		w.line("\tconst uint64_t hi = wd > 32u ? %s_field(%s_cut, pos + 32u, wd - 32u) : 0u;", g.name, g.name)
		w.line("\treturn %s_cut_lo[f] + (lo | hi << 32);", g.name)
	}
	w.line("}")
	w.line("")
}
