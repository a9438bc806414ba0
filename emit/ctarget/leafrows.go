package ctarget

import "fmt"

// Packed leaf rows. Where a model has at most 16 distinct leaf rows (a
// fully grown classification forest has few: its leaves are mostly pure),
// NAME_leaf_row holds each leaf's row in 1, 2 or 4 bits, eight, four or
// two to a byte, low bits first, instead of a byte each.

// leafRowBits is the width of a packed leaf row for nRows rows: 1, 2 or 4
// bits, or 0 when rows take whole bytes (more than 16 rows).
func leafRowBits(nRows int) int {
	switch b := bitsFor(nRows - 1); {
	case b <= 1:
		return 1
	case b <= 2:
		return 2
	case b <= 4:
		return 4
	}
	return 0
}

// leafRowBytes is what NAME_leaf_row takes for nLeaves leaves of nRows rows.
func leafRowBytes(nLeaves, nRows int) int {
	if b := leafRowBits(nRows); b > 0 {
		return (nLeaves*b + 7) / 8
	}
	return nLeaves * intBytes(nRows-1)
}

// writeLeafRows writes NAME_leaf_row, each leaf's row of NAME_leaf.
func (t *tableWriter) writeLeafRows() {
	g, tl, w := t.g, t.tl, t.w
	if pb := tl.packedLeafRowBits(g.o.Pack); pb > 0 {
		t.writePackedLeafRows(pb)
		return
	}
	n := len(tl.leafOf)
	b := leafRowBits(tl.maxRows())
	if b == 0 {
		rb := intBytes(tl.maxRows() - 1)
		w.line("/* Per leaf in preorder, its row of %s_leaf. */", g.name)
		w.line("static const %s %s_leaf_row[%d] = {", uintType(rb), g.name, n)
		g.numbers(w, n, func(i int) string { return fmt.Sprint(tl.leafOf[i]) })
		w.line("};")
		g.tables = append(g.tables, Table{g.name + "_leaf_row", "leaf row per leaf", n, rb})
		w.line("")
		return
	}
	per := 8 / b
	nb := max((n*b+7)/8, 1)
	w.line("/* Per leaf in preorder, its row of %s_leaf in %s, %d to a byte, low bits first. */", g.name, nbits(b), per)
	w.line("static const uint8_t %s_leaf_row[%d] = {", g.name, nb)
	g.numbers(w, nb, func(i int) string {
		v := 0
		for j := 0; j < per && i*per+j < n; j++ {
			v |= tl.leafOf[i*per+j] << (j * b)
		}
		return fmt.Sprintf("0x%02xu", v)
	})
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_leaf_row", fmt.Sprintf("leaf row per leaf, %s each", nbits(b)), nb, 1})
	w.line("")
}

// leafRowOf is the C expression of the row of leaf at (a uint32_t).
func (t *tableWriter) leafRowOf(at string) string {
	if pb := t.tl.packedLeafRowBits(t.g.o.Pack); pb > 0 {
		return fmt.Sprintf("%s_field(%s_leaf_row, %s * %du, %du)", t.g.name, t.g.name, at, pb, pb)
	}
	b := leafRowBits(t.tl.maxRows())
	if b == 0 {
		return fmt.Sprintf("%s_leaf_row[%s]", t.g.name, at)
	}
	per := 8 / b
	return fmt.Sprintf("(((uint32_t)%s_leaf_row[%s / %du] >> ((%s %% %du) * %du)) & %du)", t.g.name, at, per, at, per, b, 1<<b-1)
}
