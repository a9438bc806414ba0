package ctarget

import (
	"errors"
	"fmt"
	"math/bits"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
)

// The constant-time walk (Options.ConstantTime), for control loops that
// need every prediction to take the same time. It is the binned layout,
// written so that the instructions executed do not depend on the input:
//
//   - a row is mapped to bins by a lower-bound search of a fixed number of
//     steps per feature, ceil(log2 n) + 1 comparisons for n cuts, whatever
//     the input (the branch-free form of Khuong and Morin, "Array layouts
//     for comparison-based searching", ACM JEA 2017);
//   - NaN, the missing band, the zero band, -0 and the rounding of a double
//     to a float (binned32.go) are computed with integer masks, not tests;
//   - every tree is walked exactly its depth in steps: a leaf reached early
//     keeps stepping to itself (the step's changes are masked off), so every
//     prediction tests WorstSplits splits;
//   - comparisons are the borrow of a subtraction, selections masks
//     (Warren, "Hacker's Delight", 2nd ed., section 2-12, from memory), so
//     no compiler needs a conditional branch or select for them.
//
// Loops run a number of times fixed by the tables (the cuts of a feature,
// the depth of a tree), never by the input. What stays data-dependent: the
// addresses read (a cut, a word, a leaf; equal in time on cores without a
// data cache such as the Cortex-M0/M4, not on cores with one), the leaf
// sums and the transform, which take the FPU's time (constant with a
// hardware FPU of the accumulator's type, e.g. the float build on a
// Cortex-M4F) or the run-time library's (soft-float addition and exp are
// data-dependent), and, for softmax, the search for the largest output.
// Set splits are refused, as the binned layout refuses them.

// ctFacts are the constant-time counts the header states.
type ctFacts struct {
	splits   int // splits tested per prediction: the sum of the depths
	features int // features mapped to a bin
	compares int // comparisons of the mapping, over all features
}

// resolveConstantTime is Resolve under Options.ConstantTime: the binned
// layout, asked for or chosen by auto, or an error.
func resolveConstantTime(p *compile.Program, o Options) (string, string, error) {
	switch o.Layout {
	case "", emit.Auto, emit.Binned:
	default:
		return "", "", fmt.Errorf("constant time: layout %s walks a tree until its leaf, so its time depends on the input\nhint: use --layout binned (or auto) with --constant-time", o.Layout)
	}
	var u *emit.Unsupported
	if err := binnable(p); errors.As(err, &u) {
		c := *u
		c.Construct += " (which the constant-time walk is built on)"
		c.Hint = "leave out --constant-time: the table layout tests set splits, in a time that depends on the input"
		return "", "", &c
	}
	return emit.Binned, "constant time: every prediction walks each tree its depth in steps", nil
}

// searchSteps is the comparisons of the lower-bound search over n cuts:
// ceil(log2 n) halvings and one last comparison.
func searchSteps(n int) int {
	if n == 0 {
		return 0
	}
	return bits.Len(uint(n-1)) + 1
}

// timeFacts writes the header's lines on time: the worst-case splits, the
// constant-time counts, and where flash, RAM, stack and instructions come
// from.
func (g *gen) timeFacts(w *printer) {
	if g.ct == nil {
		w.line(" * At most %d splits are tested per prediction (the sum of the trees' depths).", WorstSplits(g.p))
	} else {
		w.line(" * Constant time: every prediction tests exactly %d splits (each tree is walked", g.ct.splits)
		w.line(" * its depth in steps, a leaf reached early stepping to itself) and maps its")
		w.line(" * %d used features to bins in exactly %d comparisons (ceil(log2 n) + 1 for a", g.ct.features, g.ct.compares)
		w.line(" * feature of n cuts), with no branch on the input. The addresses read, the")
		w.line(" * leaf sums and the transform still depend on it: constant in time with a")
		w.line(" * hardware FPU of the accumulator's type and no data cache, not with")
		w.line(" * soft-float addition or exp.")
	}
	if len(g.o.Facts) > 0 {
		for _, f := range g.o.Facts {
			// A fact is one line of the comment, and cannot end it.
			f = strings.NewReplacer("*/", "* /", "\n", " ", "\r", " ").Replace(f)
			w.line(" * %s", f)
		}
		return
	}
	w.line(" * Flash, RAM, stack and instructions per prediction on Cortex-M and RISC-V")
	w.line(" * boards: sawmill inspect --c-sizes (emitting runs no compiler).")
}

// writeConstantTime writes, after the binned layout's tables, the tree
// depths, the branch-free helpers, NAME_bins and NAME_predict.
func (bl *binnedLayout) writeConstantTime(g *gen, t *tableWriter, w *printer) {
	bl.writeDepths(g, w)
	bl.writeCTHelpers(g, w)
	bl.writeCTKey(g, w)
	if bl.round != roundNone {
		bl.writeCTRound32(g, w)
	}
	bl.writeCTBins(g, w)
	bl.writeCTPredict(g, t, w)
	g.ct = &ctFacts{splits: WorstSplits(g.p)}
	for _, c := range bl.cuts {
		if len(c) > 0 {
			g.ct.features++
			g.ct.compares += searchSteps(len(c))
		}
	}
}

// writeDepths writes NAME_depth, the steps each tree is walked.
func (bl *binnedLayout) writeDepths(g *gen, w *printer) {
	T := len(g.p.Trees)
	most := g.p.MaxDepth()
	db := intBytes(most)
	w.line("/* Depth of each tree: the steps every walk of it takes. */")
	w.line("static const %s %s_depth[%d] = {", uintType(db), g.name, T)
	g.numbers(w, T, func(i int) string { return fmt.Sprint(g.p.Trees[i].Depth()) })
	w.line("};")
	g.tables = append(g.tables, Table{g.name + "_depth", "depth per tree", T, db})
	w.line("")
}

// writeCTHelpers writes the comparisons and the selections, branch-free,
// those the build uses (a static function left unused is a warning).
func (bl *binnedLayout) writeCTHelpers(g *gen, w *printer) {
	n := g.name
	wide, rounds := bl.inBits(g) == 64, bl.round != roundNone
	w.line("/* Comparisons without a branch: a < b (unsigned) is the borrow of a - b,")
	w.line(" * (~a & b) | ((~a | b) & (a - b)) in the top bit (Hacker's Delight, 2-12). */")
	for _, width := range []int{32, 64} {
		if width == 64 && !wide {
			continue
		}
		ut := fmt.Sprintf("uint%d_t", width)
		w.line("static uint32_t %s_lt%d(%s a, %s b)", n, width, ut, ut)
		w.line("{")
		w.line("\treturn (uint32_t)(((~a & b) | ((~a | b) & (a - b))) >> %d);", width-1)
		w.line("}")
		w.line("")
	}
	w.line("/* 1 when a == b: a ^ b is 0 exactly when neither it nor its negation has the top bit. */")
	for _, width := range []int{32, 64} {
		if width == 32 && wide && !rounds || width == 64 && !wide {
			continue
		}
		ut := fmt.Sprintf("uint%d_t", width)
		w.line("static uint32_t %s_eq%d(%s a, %s b)", n, width, ut, ut)
		w.line("{")
		w.line("\tconst %s d = a ^ b;", ut)
		w.line("\treturn (uint32_t)((d | (0u - d)) >> %d) ^ 1u;", width-1)
		w.line("}")
		w.line("")
	}
	w.line("/* a when c is 1, b when c is 0, by a mask. */")
	w.line("static uint32_t %s_sel32(uint32_t c, uint32_t a, uint32_t b)", n)
	w.line("{")
	w.line("\treturn b ^ ((a ^ b) & (0u - c));")
	w.line("}")
	w.line("")
	if rounds {
		w.line("static uint64_t %s_sel64(uint32_t c, uint64_t a, uint64_t b)", n)
		w.line("{")
		w.line("\treturn b ^ ((a ^ b) & (0u - (uint64_t)c));")
		w.line("}")
		w.line("")
	}
}

// writeCTKey writes NAME_bits, NAME_is_nan and NAME_key (and NAME_key32
// for a rounded double build), branch-free.
func (bl *binnedLayout) writeCTKey(g *gen, w *printer) {
	in := bl.inBits(g)
	kt := fmt.Sprintf("uint%d_t", in)
	sign, abs, inf := bitsLit(1<<63, 64), bitsLit(1<<63-1, 64), bitsLit(0x7ff0000000000000, 64)
	if in == 32 {
		sign, abs, inf = bitsLit(1<<31, 32), bitsLit(1<<31-1, 32), bitsLit(0x7f800000, 32)
	}
	g.writeBitsFunc(w, kt)
	w.line("/* 1 when bits b are a NaN: all exponent bits set and a fraction. */")
	w.line("static uint32_t %s_is_nan(%s b)", g.name, kt)
	w.line("{")
	w.line("\treturn %s_lt%d(%s, b & %s);", g.name, in, inf, abs)
	w.line("}")
	w.line("")
	if bl.needKey(g) {
		bl.writeCTKeyOf(g, w, "key", in, sign)
	}
	if bl.round != roundNone {
		bl.writeCTKeyOf(g, w, "key32", 32, bitsLit(1<<31, 32))
	}
}

// writeCTKeyOf writes NAME_<fn>, the key of bits of the width given: -0
// cleared to +0, then every bit flipped for a negative, the sign bit for a
// positive.
func (bl *binnedLayout) writeCTKeyOf(g *gen, w *printer, fn string, width int, sign string) {
	kt := fmt.Sprintf("uint%d_t", width)
	w.line("/* The key of bits b that are not a NaN (keys order as the values do), by masks. */")
	w.line("static %s %s_%s(%s b)", kt, g.name, fn, kt)
	w.line("{")
	w.line("\tb &= ~((%s)0u - (%s)%s_eq%d(b, %s)); /* -0 is +0 to every comparison */", kt, kt, g.name, width, sign)
	w.line("\treturn b ^ (((%s)0u - (b >> %d)) | %s);", kt, width-1, sign)
	w.line("}")
	w.line("")
}

// writeCTRound32 writes NAME_round32 as binned32.go's, every case computed
// and the one that applies selected by masks; shifts of 64-bit values are
// by constants only (a variable one is a branch or a library call on
// 32-bit cores), the variable part done on 32-bit halves.
func (bl *binnedLayout) writeCTRound32(g *gen, w *printer) {
	n := g.name
	w.line("/* 2^s for s in 0..63, from 32-bit shifts. */")
	w.line("static uint64_t %s_pow2(uint32_t s)", n)
	w.line("{")
	w.line("\tconst uint32_t lo = %s_lt32(s, 32u);", n)
	w.line("\tconst uint32_t p = 1u << (s & 31u);")
	w.line("\treturn ((uint64_t)(p & (0u - (lo ^ 1u))) << 32) | (uint64_t)(p & (0u - lo));")
	w.line("}")
	w.line("")
	bl.writeRound32Doc(g, w)
	w.line("static uint32_t %s_round32(uint64_t b)", n)
	w.line("{")
	w.in()
	w.line("const uint32_t neg = (uint32_t)(b >> 63);")
	w.line("const uint32_t e = (uint32_t)(b >> 52) & 0x7ffu;")
	w.line("const uint64_t frac = b & 0x000fffffffffffffull;")
	w.line("const uint32_t inf = %s_eq32(e, 0x7ffu);", n)
	w.line("const uint32_t big = %s_lt32(1150u, e) & (inf ^ 1u); /* |x| >= 2^128 */", n)
	w.line("const uint32_t normal = %s_lt32(896u, e) & %s_lt32(e, 1151u); /* a normal float */", n, n)
	w.line("const uint32_t small = %s_lt32(e, 897u); /* a float subnormal, or zero: units of 2^-149 */", n)
	w.line("const uint32_t e0 = %s_eq32(e, 0u);", n)
	w.line("const uint64_t sig = frac | ((uint64_t)(e0 ^ 1u) << 52);")
	w.line("/* the shift of a small input, held to 30..61 (the result is 0 from 53 on) */")
	w.line("uint32_t sh = %s_sel32(e0, 925u, 926u - e);", n)
	w.line("sh = %s_sel32(%s_lt32(61u, sh), 61u, sh);", n, n)
	w.line("sh = %s_sel32(%s_lt32(sh, 30u), 30u, sh);", n, n)
	w.line("const uint32_t ms = (uint32_t)(sig >> 30) >> (sh - 30u);")
	w.line("const uint64_t rs = sig & (%s_pow2(sh) - 1u);", n)
	w.line("const uint64_t hs = %s_pow2(sh - 1u);", n)
	w.line("const uint32_t mn = ((e - 896u) << 23) | (uint32_t)(frac >> 29);")
	w.line("uint32_t m = %s_sel32(normal, mn, 0u) | %s_sel32(small, ms, 0u) | %s_sel32(big, 0x7f7fffffu, 0u) | %s_sel32(inf, 0x7f800000u, 0u);", n, n, n, n)
	w.line("const uint64_t rest = %s_sel64(normal, frac & 0x1fffffffu, 0u) | %s_sel64(small, rs, 0u) | %s_sel64(big, 2u, 0u);", n, n, n)
	if bl.round == roundNearest {
		w.line("const uint64_t half = %s_sel64(normal, 0x10000000u, 0u) | %s_sel64(small, hs, 0u) | %s_sel64(big | inf, 1u, 0u);", n, n, n)
	} else {
		w.line("(void)hs;")
	}
	w.line("const uint32_t inexact = %s_eq64(rest, 0u) ^ 1u;", n)
	switch bl.round {
	case roundUp:
		w.line("m += inexact & (neg ^ 1u);")
	case roundDown:
		w.line("m += inexact & neg;")
	default:
		w.line("(void)inexact;")
		w.line("m += %s_lt64(half, rest) | (%s_eq64(rest, half) & m & 1u);", n, n)
	}
	w.line("return (neg << 31) | m; /* a carry into the exponent is the next float up */")
	w.out()
	w.line("}")
	w.line("")
}

// writeRound32Doc writes the comment over NAME_round32.
func (bl *binnedLayout) writeRound32Doc(g *gen, w *printer) {
	what := map[string]string{roundUp: "up (towards +infinity)", roundDown: "down (towards -infinity)",
		roundNearest: "to nearest, ties to even (as (float)x)"}[bl.round]
	w.line("/* The float bits of the double with bits b (not a NaN), rounded %s", what)
	w.line(" * with integer operations only and no branch: the cuts are floats, and comparing")
	w.line(" * the rounded input with them decides every split as comparing the double would. */")
}

// writeCTBins writes NAME_bins with a search of fixed length per feature
// and the missing cases selected by masks.
func (bl *binnedLayout) writeCTBins(g *gen, w *printer) {
	p, n := g.p, g.name
	in := bl.inBits(g)
	kt := fmt.Sprintf("uint%d_t", in)
	zm := ""
	if bl.hasZM {
		zm = ", uint8_t *zero"
	}
	w.line("/* The bin of each feature of x: the number of its cuts below x[f], or %s", hexLit(bl.miss))
	w.line(" * when x[f] is missing%s. Every feature takes", map[bool]string{true: "; zero[f] is 1 when x[f] is in the zero band"}[bl.hasZM])
	w.line(" * the same steps for every input: the loops run as often as the tables say. */")
	w.line("static void %s_bins(const %s *x, %s *bin%s)", n, g.ft, bl.binType(), zm)
	w.line("{")
	w.in()
	w.line("uint32_t f;")
	w.line("for (f = 0; f < %s_NUM_FEATURES; f++) {", g.upper)
	w.in()
	w.line("const uint32_t first = %s_cut_base[f];", n)
	w.line("uint32_t len = %s_cut_base[f + 1u] - first, lo = first;", n)
	w.line("const %s b = %s_bits(&x[f]);", kt, n)
	if bl.needKey(g) {
		w.line("const %s k = %s_key(b);", kt, n)
	}
	w.line("uint32_t miss;")
	if bl.hasZM {
		w.line("zero[f] = 0;")
	}
	w.line("if (len == 0u) {")
	w.line("\tbin[f] = 0; /* no split reads it (fixed by the tables) */")
	w.line("\tcontinue;")
	w.line("}")
	w.line("miss = %s_is_nan(b);", n)
	if p.HasMissingValue {
		w.line("miss |= (%s_lt%d(k, %s) | %s_lt%d(%s, k)) ^ 1u; /* the missing band */", n, in, bitsLit(bl.kLo, in), n, in, bitsLit(bl.kHi, in))
	}
	if bl.hasZM {
		w.line("zero[f] = (uint8_t)((%s_lt%d(k, %s) | %s_lt%d(%s, k)) ^ 1u);", n, in, bitsLit(bl.zLo, in), n, in, bitsLit(bl.zHi, in))
	}
	ck, lt := "k", fmt.Sprintf("%s_lt%d", n, bl.keyBits)
	if bl.round != roundNone {
		w.line("const uint32_t k32 = %s_key32(%s_round32(b));", n, n)
		ck = "k32"
	}
	w.line("while (len > 1u) { /* ceil(log2 len) halvings: cuts before lo are below the key */")
	w.line("\tconst uint32_t half = len >> 1;")
	w.line("\tlo += (0u - %s(%s_cut[lo + half], %s)) & half;", lt, n, ck)
	w.line("\tlen -= half;")
	w.line("}")
	w.line("lo += %s(%s_cut[lo], %s);", lt, n, ck)
	w.line("bin[f] = (%s)%s_sel32(miss, %s, lo - first);", bl.binType(), n, hexLit(bl.miss))
	w.out()
	w.line("}")
	w.out()
	w.line("}")
	w.line("")
}

// writeCTPredict writes NAME_predict: the bins, then every tree walked its
// depth in steps, each step's changes masked off once a leaf is reached,
// the leaves added in tree order.
func (bl *binnedLayout) writeCTPredict(g *gen, t *tableWriter, w *printer) {
	n := g.name
	wt := bl.predictOpen(g, w)
	w.line("uint32_t i = %s_start[t];", n)
	w.line("uint32_t at0 = i + t; /* leaves before the tree: one more than splits, per tree */")
	w.line("uint32_t live = 1u; /* 0 once a leaf is reached: the steps left change nothing */")
	w.line("uint32_t s;")
	w.line("for (s = %s_depth[t]; s != 0u; s--) {", n)
	w.in()
	bl.stepFields(g, w, wt)
	ml := "1u"
	if bl.hasML {
		w.line("const uint32_t ml = %s;", binField(bl.mlShift(), 1))
		w.line("/* missing (bin all ones) goes left: bin+1 wraps to 0 */")
		w.line("uint32_t r = %s_lt32(k + ml, (b + ml) & %s); /* 1: right */", n, hexLit(bl.miss))
		ml = "(ml ^ 1u)"
	} else {
		w.line("uint32_t r = %s_lt32(k, b); /* 1: right; missing (bin all ones) too */", n)
	}
	if bl.hasZM {
		w.line("r = %s_sel32(%s & (uint32_t)zero[%s], %s, r); /* zero counts as missing here */", n, binField(bl.zmShift(), 1), binField(0, bl.fBits), ml)
	}
	w.line("const uint32_t leaf = %s_sel32(r, %s, %s); /* the child is a leaf */", n, binField(bl.llShift()+1, 1), binField(bl.llShift(), 1))
	w.line("const uint32_t go = 0u - live;")
	w.line("at0 += (0u - r) & (p1 + 1u) & go; /* p1 is 0 when the left child is a leaf */")
	w.line("i += (1u + ((0u - r) & p1)) & (0u - (leaf ^ 1u)) & go;")
	w.line("live &= leaf ^ 1u;")
	w.out()
	w.line("}")
	t.add("0", "t")
	w.out()
	w.line("}")
}

// ctLogistic writes the logistic of acc[j] without a test of its sign:
// e = exp(-|z|) is exp(-z) for z >= 0 and exp(z) for z < 0, and the
// numerator, 1 or e, is chosen by the sign bit with a mask, so the
// operations are the ordinary form's, bit for bit (-0 gives 1/2 either
// way).
func (g *gen) ctLogistic(w *printer, exp, one string) {
	at, ut, abs := g.at, "uint64_t", "fabs"
	if at == "float" {
		ut, abs = "uint32_t", "fabsf"
	}
	w.line("const %s e = %s(-%s(acc[j]));", at, exp, abs)
	w.line("const %s d = %s + e;", at, one)
	w.line("%s num = %s;", at, one)
	w.line("%s nb, eb, m;", ut)
	w.line("memcpy(&m, &acc[j], sizeof m);")
	w.line("memcpy(&nb, &num, sizeof nb);")
	w.line("memcpy(&eb, &e, sizeof eb);")
	w.line("m = (%s)0u - (m >> %d); /* all ones when z is negative */", ut, map[string]int{"uint64_t": 63, "uint32_t": 31}[ut])
	w.line("nb ^= (nb ^ eb) & m;")
	w.line("memcpy(&num, &nb, sizeof num);")
	w.line("acc[j] = num / d;")
}

// constantTimeSizes is Sizes under Options.ConstantTime: the binned
// layout's row, its tables those of the constant-time walk (the depths
// added), or the error that refuses the model.
func constantTimeSizes(p *compile.Program, o Options) ([]Size, error) {
	if _, _, err := resolveConstantTime(p, o); err != nil {
		return nil, err
	}
	s, err := sizeOf(p, o, emit.Binned)
	if err != nil {
		return nil, err
	}
	return []Size{s}, nil
}
