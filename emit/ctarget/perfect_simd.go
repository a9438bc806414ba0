package ctarget

import "fmt"

// The perfect walk's SIMD lanes. Where perfectSimd allows, NAME_perfect
// walks its block's rows 16 at a time in AVX-512 registers under
// __AVX512F__, and the portable scalar walk (perfectChains interleaved
// rows) stays under #else, which AVX2 builds take too.
//
// The lanes gather nothing on the way down: a block's keys are stored
// feature-major (key[k * NAME_PF_ROWS + lane]), so the 16 rows' key k is
// one load, and each node of the perfect tree is visited for the whole
// register, in depth-first order, under the mask of the lanes that reach
// it: right = the masked comparison key > t (lanes outside the mask stay
// 0), left = the node's mask and not right. The masks of a level's right
// turns, ORed together (a lane is under one node a level), are the bits of
// each lane's leaf index, high to low; with float sums the leaf is looked
// up by permutes of the tree's 2^D leaves (one register up to depth 4, a
// two-register permute at 5, two of them and a blend on the root's turn at
// 6: simdPermuteLeaves); with double sums each lane takes its leaf by a
// masked move of the broadcast leaf at the last level. The register of
// leaves is added to the rows' sums once a tree: float sums in one
// register, double sums in two halves. So each lane makes the comparisons
// its row makes in the scalar walk (keys and thresholds are never NaN)
// and adds the same leaves in the same tree order with the same IEEE
// additions: the same bits.
//
// The permutes replaced 64 masked moves a register at depth 6: on the
// 500-round depth-6 XGBoost model the lanes took 1,360 to 1,376 ns a row
// against the masked moves' 1,625 to 1,646 (best of 5, 10,000 rows, three
// interleaved runs, gcc 12 -O2 -march=x86-64-v4, load average 1.5). Not
// kept, measured the same way: the lanes comparing ordered integers as the
// scalar walk does (perfect_ord.go; vpcmpud for vcmpps, the thresholds
// converted 16 at a time a tree) 1,414 to 1,493; the leaf index built in a
// vector by a masked OR a node instead of ORed masks, 1,517 to 1,905 against
// 1,461 to 1,856 in a noisier run (load 2.3), no clear gain; comparisons
// without masks, the masks ANDed in general registers, 2,430 to 3,206
// against 1,406 to 1,910 (load 3.5); the key addresses from a second table
// of 16-bit offsets (no shift and add a node), 1,862 to 2,186 against
// 1,454 to 2,026 (load 3.5).
//
// Why not gathers: on this AMD EPYC a 16-lane gather (vgatherdps) took 10
// ns at best and 20 ns of latency (a loop of independent gathers, gcc 12
// -O2 -march=x86-64-v4); a walk gathering each lane's key per level
// (AVX-512, the top levels' key indexes and thresholds permuted from
// registers) took 3,861 ns a row on the 500-round depth-6 XGBoost model
// against the scalar walk's 2,605, and the AVX2 form 4,306. Visiting every
// node costs 2^D - 1 masked comparisons a tree for 16 rows against D
// scalar steps a row, so the lanes pay for shallow trees only; AVX2 has
// no mask registers, and its form of the same walk (compare, and, andnot,
// blend) runs more instructions a row than the scalar walk.
//
// The rule (perfectSimd): float keys and thresholds (floatExact at every
// split), one output, depth at most PerfectSimdMaxDepth; a block of whole
// 16-row registers always holds then (float keys, at most
// PerfectMaxFeatures features). The rest keeps the scalar walk only.

// PerfectSimdMaxDepth is the deepest forest whose perfect walk gets
// AVX-512 lanes: a tree visits 2^D - 1 nodes for 16 rows.
const PerfectSimdMaxDepth = 6

// perfectSimd reports whether NAME_perfect gets AVX-512 lanes: float keys,
// one output, depth at most PerfectSimdMaxDepth, a block of whole 16-row
// registers.
func perfectSimd(g *gen, pf *perfectForest) bool {
	return pf.keyType == "float" && g.p.NumOutputs == 1 && pf.depth <= PerfectSimdMaxDepth && pf.rows%(16*perfectSimdRegs) == 0
}

// perfectLanesNote ends the header's description of NAME_predict_batch:
// whether an AVX-512 build takes the lanes.
func (g *gen) perfectLanesNote(w *printer) {
	if g.buildPerfect().simd {
		w.line(" * tree, in a fixed number of steps without branches on the data; 16 rows")
		w.line(" * a register where __AVX512F__ is defined, with the same bits. */")
		return
	}
	w.line(" * tree, in a fixed number of steps without branches on the data. */")
}

// perfectSimdDefs writes the keys' strides: feature-major under
// __AVX512F__ (the lanes load 16 rows' key at once), row-major for the
// scalar walk.
func (g *gen) perfectSimdDefs(w *printer) {
	u := g.upper
	w.line("#if defined(__AVX512F__)")
	w.line("#define %s_PF_LANE 1u /* keys feature-major: key[k * %s_PF_ROWS + lane] */", u, u)
	w.line("#define %s_PF_KEY %s_PF_ROWS", u, u)
	w.line("#else")
	w.line("#define %s_PF_LANE %s_PF_KEYS /* keys row-major: key[lane * %s_PF_KEYS + k] */", u, u, u)
	w.line("#define %s_PF_KEY 1u", u)
	w.line("#endif")
	w.line("")
}

// perfectSimdCall writes NAME_perfect's walk: the lanes under
// __AVX512F__, the scalar walk (scalar) under #else.
func (g *gen) perfectSimdCall(w *printer, scalar func()) {
	w.line("#if defined(__AVX512F__)")
	w.line("%s_pf_avx512(key, used, sum);", g.name)
	w.line("#else")
	scalar()
	w.line("#endif")
}

// perfectSimdRegs is the number of 16-row registers a walk of a tree
// takes together, sharing each node's key index and threshold. On the
// 500-round depth-6 XGBoost model (leaves by permutes, 10,000 rows, gcc 12
// -O2 -march=x86-64-v4, best of 5, three interleaved runs, load average
// 1.5) 2 took 1,360 to 1,376 ns a row against 4's 1,424 to 1,483 (64 rows,
// one threshold broadcast for four compares, but masks spilled) and, in a
// later run (load 2.3), 1's 1,742 to 1,965 against 2's 1,461 to 1,856.
const perfectSimdRegs = 2

// perfectSimdWalk writes NAME_pf_avx512 under __AVX512F__: the block's
// rows perfectSimdRegs registers at a time, tree by tree, the tree's nodes
// unrolled depth first.
func (g *gen) perfectSimdWalk(w *printer, pf *perfectForest) {
	u, H := g.upper, perfectSimdRegs
	w.line("#if defined(__AVX512F__)")
	w.line("/* The walk of a block's first used rows (a multiple of %d) through every", 16*H)
	w.line(" * tree, %d rows at a time in %d registers, keys feature-major: node by node", 16*H, H)
	w.line(" * depth first, each node under the mask of the lanes that reach it")
	if g.at == "float" {
		w.line(" * (m<node>_<register>); a lane's right turns, level by level (r<level>_<register>,")
		w.line(" * the root's m2), are the bits of its leaf's index, and its leaf is looked up")
		w.line(" * by permutes of the tree's leaves; the leaves are added to the sums once a")
		w.line(" * tree, in tree order. */")
	} else {
		w.line(" * (m<node>_<register>); at the last level each lane takes its leaf by a")
		w.line(" * masked move, and the leaves are added to the sums once a tree, in tree")
		w.line(" * order. */")
	}
	w.line("static void %s_pf_avx512(const float *key, size_t used, %s *sum)", g.name, g.at)
	w.line("{")
	w.in()
	w.line("uint32_t tree;")
	w.line("size_t c;")
	w.line("for (c = 0; c < used; c += %du) {", 16*H)
	w.in()
	w.line("const float *const kc = key + c;")
	for h := 0; h < H; h++ {
		if g.at == "float" {
			w.line("__m512 s%d = _mm512_loadu_ps(sum + c + %du);", h, 16*h)
		} else {
			w.line("__m512d s%d = _mm512_loadu_pd(sum + c + %du), s%dh = _mm512_loadu_pd(sum + c + %du);", h, 16*h, h, 16*h+8)
		}
	}
	w.line("for (tree = 0; tree < %du; tree++) {", len(g.p.Trees))
	w.in()
	w.line("const %s *const fe = %s_pf_feat + tree * %s_PF_INNER;", pf.featTyp, g.name, u)
	w.line("const float *const th = %s_pf_thr + tree * %s_PF_INNER;", g.name, u)
	w.line("const %s *const lv = %s_pf_leaf + tree * (%s_PF_INNER + 1u);", g.at, g.name, u)
	for h := 0; h < H; h++ {
		w.line("const __mmask16 m0_%d = 0xffffu;", h)
		if g.at == "float" {
			for d := 1; d < pf.depth; d++ {
				w.line("__mmask16 r%d_%d = 0u;", d, h)
			}
		} else {
			w.line("__m512d v%d = _mm512_setzero_pd(), v%dh = _mm512_setzero_pd();", h, h)
		}
	}
	w.line("const float *k;")
	w.line("__m512 t;")
	g.simdNode(w, pf, 0)
	if g.at == "float" {
		g.simdPermuteLeaves(w, pf)
	}
	for h := 0; h < H; h++ {
		if g.at == "float" {
			w.line("s%d = _mm512_add_ps(s%d, v%d);", h, h, h)
		} else {
			w.line("s%d = _mm512_add_pd(s%d, v%d);", h, h, h)
			w.line("s%dh = _mm512_add_pd(s%dh, v%dh);", h, h, h)
		}
	}
	w.out()
	w.line("}")
	for h := 0; h < H; h++ {
		if g.at == "float" {
			w.line("_mm512_storeu_ps(sum + c + %du, s%d);", 16*h, h)
		} else {
			w.line("_mm512_storeu_pd(sum + c + %du, s%d);", 16*h, h)
			w.line("_mm512_storeu_pd(sum + c + %du, s%dh);", 16*h+8, h)
		}
	}
	w.out()
	w.line("}")
	w.out()
	w.line("}")
	w.line("#endif")
	w.line("")
}

// simdPermuteLeaves writes each register's leaves looked up by permutes:
// a lane's leaf index is the levels' right turns, r<level>_<register> (the
// root's is m2), as bits, high to low.
func (g *gen) simdPermuteLeaves(w *printer, pf *perfectForest) {
	D := pf.depth
	leaves := 1 << D
	for q := 0; q*16 < leaves; q++ {
		if leaves < 16 {
			w.line("const __m512 l%d = _mm512_maskz_loadu_ps(0x%xu, lv);", q, 1<<leaves-1)
		} else {
			w.line("const __m512 l%d = _mm512_loadu_ps(lv + %d);", q, 16*q)
		}
	}
	for h := 0; h < perfectSimdRegs; h++ {
		// bits from the levels below the root where 64 leaves take two halves
		top := 0
		if D == 6 {
			top = 1
		}
		w.line("__m512i x%d = _mm512_setzero_si512();", h)
		for d := top; d < D; d++ {
			m := fmt.Sprintf("r%d_%d", d, h)
			if d == 0 {
				m = fmt.Sprintf("m2_%d", h)
			}
			w.line("x%d = _mm512_mask_or_epi32(x%d, %s, x%d, _mm512_set1_epi32(%d));", h, h, m, h, 1<<(D-1-d))
		}
		switch {
		case D == 6:
			w.line("const __m512 v%d = _mm512_mask_blend_ps(m2_%d, _mm512_permutex2var_ps(l0, x%d, l1), _mm512_permutex2var_ps(l2, x%d, l3));", h, h, h, h)
		case D == 5:
			w.line("const __m512 v%d = _mm512_permutex2var_ps(l0, x%d, l1);", h, h)
		default:
			w.line("const __m512 v%d = _mm512_permutexvar_ps(x%d, l0);", h, h)
		}
	}
}

// simdNode writes node n's visit under its masks m<n>_<register>, then its
// children's (depth first); a node of the last level sets its two leaves
// instead.
func (g *gen) simdNode(w *printer, pf *perfectForest, n int) {
	inner := 1<<pf.depth - 1
	cmp := map[bool]string{true: "_CMP_GE_OQ", false: "_CMP_GT_OQ"}[pf.ge]
	l, r := 2*n+1, 2*n+2
	w.line("k = kc + (size_t)fe[%d] * %s_PF_ROWS;", n, g.upper)
	w.line("t = _mm512_set1_ps(th[%d]);", n)
	level := 0
	for 1<<(level+1)-1 <= n {
		level++
	}
	for h := 0; h < perfectSimdRegs; h++ {
		w.line("const __mmask16 m%d_%d = _mm512_mask_cmp_ps_mask(m%d_%d, _mm512_loadu_ps(k + %du), t, %s);", r, h, n, h, 16*h, cmp)
		if g.at == "float" && level > 0 {
			w.line("r%d_%d = (__mmask16)(r%d_%d | m%d_%d);", level, h, level, h, r, h)
		}
		if l < inner {
			w.line("const __mmask16 m%d_%d = (__mmask16)(m%d_%d & ~m%d_%d);", l, h, n, h, r, h)
		}
	}
	if l < inner {
		g.simdNode(w, pf, l)
		g.simdNode(w, pf, r)
		return
	}
	if g.at == "float" {
		return
	}
	for h := 0; h < perfectSimdRegs; h++ {
		g.simdLeaf(w, fmt.Sprintf("m%d_%d", n, h), h, l-inner)
		g.simdLeaf(w, fmt.Sprintf("m%d_%d", r, h), h, r-inner)
	}
}

// simdLeaf writes the masked move of leaf li's value into the lanes of
// mask of register h (float: v<h>; double: the low 8 lanes into v<h>, the
// high 8 into v<h>h).
func (g *gen) simdLeaf(w *printer, mask string, h, li int) {
	if g.at == "float" {
		w.line("v%d = _mm512_mask_mov_ps(v%d, %s, _mm512_set1_ps(lv[%d]));", h, h, mask, li)
		return
	}
	w.line("v%d = _mm512_mask_mov_pd(v%d, (__mmask8)%s, _mm512_set1_pd(lv[%d]));", h, h, mask, li)
	w.line("v%dh = _mm512_mask_mov_pd(v%dh, (__mmask8)(%s >> 8), _mm512_set1_pd(lv[%d]));", h, h, mask, li)
}
