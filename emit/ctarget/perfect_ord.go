package ctarget

// Ordered integer keys. Where the perfect walk's keys and thresholds are
// floats, it stores each key as the unsigned integer whose order is the
// float's (perfectOrdFunc): for floats a and b, neither NaN, a > b exactly
// when ord(a) > ord(b), with -0 taken as +0 (a split never tells them
// apart). Keys are never NaN (NaN is stored as -inf or +inf), so each
// comparison decides as the float one does. The thresholds table stays
// floats, readable as the model's cuts; each tree's thresholds are
// converted into a small local array once a block, before its rows walk
// the tree (63 conversions for up to 64 rows at depth 6).
//
// A step then compiles to five instructions (gcc 12 -O2: the key index,
// the key, a compare with the threshold in memory, an address, an add
// with carry) where the float step took seven. On the 500-round depth-6
// XGBoost model (10,000 rows, gcc 12 -O2) NAME_predict_batch ran 19,345
// instructions a row against float keys' 22,930 (callgrind), and took
// 1,713 to 1,871 ns a row against 1,965 to 2,025 (best of 5, three
// interleaved runs, load average 1.5). The tree's conversion is a loop of
// 2^depth (vectorized by gcc -O2; a loop of 63 calls of NAME_pf_ord ran
// 23,537 instructions a row, more than float keys), and a first form
// whose conversion branched on -0 and on the sign took 1,972 to 2,119 ns. The AVX-512 lanes keep float keys (they
// measured slower on integers: perfect_simd.go), so where both walks are
// in a file the key type is chosen under __AVX512F__ (perfectOrdDefs).

// ordBits is the C expression of the ordered integer of a float's bits
// b.u (no -0): NAME_pf_ord and the thresholds' loop write it alike.
const ordBits = "b.u ^ ((0u - (b.u >> 31)) | 0x80000000u)"

// keyCType is the C type of a block's stored keys: under simd, the macro
// perfectOrdDefs defines.
func (g *gen) keyCType(pf *perfectForest) string {
	switch {
	case pf.ord && pf.simd:
		return g.upper + "_PF_KEYT"
	case pf.ord:
		return "uint32_t"
	}
	return pf.keyType
}

// perfectOrdDefs writes, where the AVX-512 lanes are in the file, the
// stored keys' type and conversion: floats for the lanes, ordered
// integers for the scalar walk.
func (g *gen) perfectOrdDefs(w *printer) {
	u := g.upper
	w.line("#if defined(__AVX512F__)")
	w.line("#define %s_PF_KEYT float /* the lanes compare floats */", u)
	w.line("#define %s_PF_KEY_OF(f) (f)", u)
	w.line("#else")
	w.line("#define %s_PF_KEYT uint32_t /* the scalar walk compares ordered integers */", u)
	w.line("#define %s_PF_KEY_OF(f) %s_pf_ord(f)", u, g.name)
	w.line("#endif")
	w.line("")
}

// perfectOrdFunc writes NAME_pf_ord, the ordered integer of a float
// (where the lanes are in the file, for builds without AVX-512 only).
func (g *gen) perfectOrdFunc(w *printer, simd bool) {
	if simd {
		w.line("#if !defined(__AVX512F__)")
	}
	w.line("/* The unsigned integer whose order is f's: for floats a and b, neither NaN,")
	w.line(" * a > b exactly when %s_pf_ord(a) > %s_pf_ord(b); -0 is taken as +0. */", g.name, g.name)
	w.line("static uint32_t %s_pf_ord(float f)", g.name)
	w.line("{")
	w.in()
	w.line("union { float f; uint32_t u; } b;")
	w.line("b.f = f;")
	w.line("b.u = b.u == 0x80000000u ? 0u : b.u; /* -0 */")
	w.line("return %s; /* negative: all bits flipped, else the sign bit */", ordBits)
	w.out()
	w.line("}")
	if simd {
		w.line("#endif")
	}
	w.line("")
}

// perfectOrdThr writes th, the current tree's thresholds as ordered
// integers, converted from the float table: 2^depth of them (the last the
// next tree's first, or the table's extra +inf), so that gcc -O2
// vectorizes the loop. A threshold is never -0 (perfectPlace).
func (g *gen) perfectOrdThr(w *printer) {
	u := g.upper
	w.line("const float *const tf = %s_pf_thr + tree * %s_PF_INNER;", g.name, u)
	w.line("uint32_t th[%s_PF_INNER + 1u];", u)
	w.line("for (j = 0; j < (int)%s_PF_INNER + 1; j++) { /* as %s_pf_ord */", u, g.name)
	w.in()
	w.line("union { float f; uint32_t u; } b;")
	w.line("b.f = tf[j];")
	w.line("th[j] = %s;", ordBits)
	w.out()
	w.line("}")
}

// perfectOrdPair writes the two ordered keys of the input v (under simd,
// through NAME_PF_KEY_OF).
func (g *gen) perfectOrdPair(w *printer, pf *perfectForest, lo, hi string) {
	cast, note := "", ""
	if g.ft != "float" {
		cast, note = "(float)", " /* exact: see the thresholds */"
	}
	conv := g.name + "_pf_ord"
	if pf.simd {
		conv = g.upper + "_PF_KEY_OF"
	}
	w.line("%s = %s(v != v ? -HUGE_VALF : %sv);%s", lo, conv, cast, note)
	w.line("%s = %s(v != v ? HUGE_VALF : %sv);", hi, conv, cast)
}
