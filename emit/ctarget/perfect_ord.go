package ctarget

import (
	"fmt"
	"math"
)

// Packed ordered keys. Where the perfect walk's keys and thresholds are
// floats, it compares them as the unsigned integers whose order is the
// floats' (NAME_pf_ord): for floats a and b, neither NaN, a > b exactly
// when ord(a) > ord(b), with -0 taken as +0 (a split never tells them
// apart). Keys are never NaN (NaN is stored as -inf or +inf), so each
// comparison decides as the float one does.
//
// Each split is one 64-bit word, NAME_pf_node: its threshold's ordered
// integer in the high half, its key index (feature << 1 | NaN goes right)
// in the low half. Each key is stored as its ordered integer in the high
// half, over a low half of zeros (x > t) or of ones (x >= t, every split a
// <). The key index is below 2^32 - 1, so for a key k and a node word n,
// k > n exactly when the key is above the threshold (x > t), or at or above
// it (x >= t): one 64-bit comparison, and one load of the node gives both
// the threshold and where the key is. A step from node i, counted from 1
// (children 2i and 2i + 1), is then
//
//	i = 2*i + (kg[r*KEYS + (uint32_t)nd[i-1]] > nd[i-1])
//
// two loads (the node, the key) where the walk of separate key index and
// threshold arrays takes three. gcc 12 and clang 14 compile the addition
// of the comparison to setb, movzbl and lea, and gcc -march=x86-64-v4
// loads the word into a vector register and moves it back; on x86-64
// under gcc and clang the whole step is four instructions of inline
// assembly (NAME_PF_STEP: load the word, copy its low half, compare the
// key in memory with it, add i to itself with carry); NAME_NO_ASM leaves
// the C.
//
// Measured on the 500-round depth-6 XGBoost model of bench/libs (10,000
// rows of the invented table, gcc 12 -O2 unless said, best of 7, five
// interleaved runs per comparison, ns a row; callgrind instructions a row
// in brackets):
//   - the walk of three arrays, eight rows (the walk before this one):
//     1,444 to 1,452 (19,340);
//   - hand-made copies of the emitted file: that walk with the compare and
//     add with carry in assembly, 1,420 (16,263); packed words, the word
//     loaded in C, eight rows 1,187 to 1,206 (13,918), twelve 1,094 to
//     1,110 (15,162), sixteen 1,064 to 1,072 (16,457: gcc spills some of
//     the sixteen node numbers); packed words rebuilt from the float table
//     once a tree a block, eight rows, 1,698 (23,652);
//   - emitted, sixteen rows: the word loaded and copied in C, 1,063 to
//     1,099, but 1,180 to 1,259 built with -march=x86-64-v4; the four
//     instructions in assembly (this walk) 1,100 to 1,139 (17,917), 1,080
//     to 1,100 with -march=x86-64-v4, 1,101 to 1,110 with clang 14 -O2;
//     the low half loaded again instead of copied (three loads a step)
//     1,341; ten rows 1,176, twelve 1,163;
//   - from C alone (NAME_NO_ASM): gcc 1,440 to 1,445 (23,231), clang 14
//     1,604 to 1,605, against the walk of three arrays' 1,444 to 1,452 and
//     1,650 under the same compilers: no slower without the assembly;
//   - the AVX-512 lanes that this walk replaced (-march=x86-64-v4): 1,250
//     to 1,365.
// A step is a chain of two dependent loads, so more rows interleaved hide
// more of it, and the load ports bound it: the three-load step loses what
// the packed word gains.

// perfectOrdChains is the number of rows whose steps the packed walk
// interleaves: see the measurements above (sixteen against ten and twelve).
const perfectOrdChains = 16

// ordBits is the C expression of the ordered integer of a float's bits
// b.u (no -0), as ordFloat computes it.
const ordBits = "b.u ^ ((0u - (b.u >> 31)) | 0x80000000u)"

// ordFloat is the ordered integer of f (-0 taken as +0), as NAME_pf_ord
// computes it.
func ordFloat(f float32) uint32 {
	u := math.Float32bits(f)
	if u == 0x80000000 {
		u = 0
	}
	return u ^ ((0 - (u >> 31)) | 0x80000000)
}

// keyCType is the C type of a block's stored keys.
func (g *gen) keyCType(pf *perfectForest) string {
	if pf.ord {
		return "uint64_t"
	}
	return pf.keyType
}

// perfectOrdFunc writes NAME_pf_ord, the ordered integer of a float.
func (g *gen) perfectOrdFunc(w *printer) {
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
	w.line("")
}

// perfectOrdNodes writes NAME_pf_node, the packed words of every split.
func (g *gen) perfectOrdNodes(w *printer, pf *perfectForest) {
	what := fmt.Sprintf("perfect walk: per tree, per split in level order (node i's children 2i and 2i + 1, from 1), the threshold as %s_pf_ord gives it << 32 | the key: feature << 1 | NaN goes right; a row goes right when its key %s the threshold (+inf in padding)", g.name, pf.cmp())
	g.bvArray(w, "uint64_t", "pf_node", what, len(pf.thr), func(i int) string {
		return fmt.Sprintf("0x%016xu", uint64(ordFloat(float32(pf.thr[i])))<<32|uint64(pf.feat[i]))
	})
}

// ordLow is the low half of every stored key: ones where a row goes right
// at x >= t, so that a key equal to the threshold is above the node word.
func (pf *perfectForest) ordLow() string {
	if pf.ge {
		return " | 0xffffffffu"
	}
	return ""
}

// perfectOrdPair writes the two packed keys of the input v.
func (g *gen) perfectOrdPair(w *printer, pf *perfectForest, lo, hi string) {
	cast, note := "", ""
	if g.ft != "float" {
		cast, note = "(float)", " /* exact: see the thresholds */"
	}
	w.line("%s = (uint64_t)%s_pf_ord(v != v ? -HUGE_VALF : %sv) << 32%s;%s", lo, g.name, cast, pf.ordLow(), note)
	w.line("%s = (uint64_t)%s_pf_ord(v != v ? HUGE_VALF : %sv) << 32%s;", hi, g.name, cast, pf.ordLow())
}

// perfectOrdStep writes NAME_PF_STEP, one step of row r of a group (keys
// at kg) from node i of the tree whose words are at nd.
func (g *gen) perfectOrdStep(w *printer, pf *perfectForest) {
	u := g.upper
	w.line("/* One step of row r of a group (its keys at kg + r * %s_PF_KEYS) from node i", u)
	w.line(" * (from 1) of the tree whose words are at nd: i becomes 2i + 1 when the key")
	w.line(" * is above the word (the row goes right), else 2i. On x86-64 under gcc and")
	w.line(" * clang, four instructions of inline assembly (load the word, copy its low")
	w.line(" * half, compare the key with it, add with carry), as neither compiler writes")
	w.line(" * the add with carry and gcc may route the word through a vector register;")
	w.line(" * define %s_NO_ASM for the C alone, with the same bits. */", u)
	w.line("#if defined(__GNUC__) && defined(__x86_64__) && !defined(%s_NO_ASM)", u)
	w.line("#define %s_PF_STEP(i, r) do { \\", u)
	w.line("\tuint64_t n_, x_; \\")
	w.line("%s", "\t__asm__(\"movq -8(%[nd],%[at],8), %[n]\\n\\tmovl %k[n], %k[ix]\\n\\tcmpq %c[of](%[kg],%[ix],8), %[n]\\n\\tadcq %[at], %[at]\" \\")
	w.line("\t\t: [at] \"+r\"(i), [n] \"=&r\"(n_), [ix] \"=&r\"(x_) \\")
	w.line("\t\t: [nd] \"r\"(nd), [kg] \"r\"(kg), [of] \"i\"((r) * %s_PF_KEYS * 8u), \\", u)
	w.line("\t\t  \"m\"(*(const uint64_t (*)[%s_PF_INNER])nd), \"m\"(*(const uint64_t (*)[%s_PF_ROWS * %s_PF_KEYS])key) \\", u, u, u)
	w.line("\t\t: \"cc\"); \\")
	w.line("} while (0)")
	w.line("#else")
	w.line("#define %s_PF_STEP(i, r) ((i) = 2u * (i) + (size_t)(kg[(size_t)(uint32_t)nd[(i) - 1u] + (r) * %s_PF_KEYS] > nd[(i) - 1u]))", u, u)
	w.line("#endif")
	w.line("")
}

// perfectOrdChains writes the walk of perfectOrdChains rows through one
// tree, their steps interleaved and unrolled, and the addition of their
// leaves (node numbers from 1: the leaf is 2^D places below the last).
func (g *gen) perfectOrdChains(w *printer, pf *perfectForest) {
	u := g.upper
	w.line("const uint64_t *const kg = key + lane * %s_PF_KEYS;", u)
	for c := 0; c < perfectOrdChains; c++ {
		w.line("size_t i%d = 1u;", c)
	}
	for d := 0; d < pf.depth; d++ {
		for c := 0; c < perfectOrdChains; c++ {
			w.line("%s_PF_STEP(i%d, %du);", u, c, c)
		}
	}
	g.perfectLeaves(w, perfectOrdChains, u+"_PF_INNER - 1u")
}
