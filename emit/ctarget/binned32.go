package ctarget

import (
	"math"
)

// 32-bit cut keys for double inputs. A double build of the binned layout
// stores its cuts as 8-byte keys unless every cut can be met by a float:
// the input is then rounded to a float with integer operations only
// (NAME_round32), and the cuts are float keys of 4 bytes. Which rounding
// keeps every split exact depends on the cuts, and one is chosen for the
// whole program:
//
//   - nearest (ties to even), for a float32 model compiled for double
//     inputs (compile.Program.Midpoints32): every split is
//     round32(x) <= t32, which the table layout already tests as
//     (float)x <= t32; here the rounding is done on the bits.
//   - up, when every cut c is a float value: x <= c exactly when
//     up(x) <= c, since up(x) >= x and up(x) is the least float not
//     below x.
//   - down, when every cut c is the double just below a float c' (or
//     +infinity): the split is x < c', and x < c' exactly when
//     down(x) < c', that is down(x) <= the float below c'. This is the
//     form of x < t splits on float thresholds (XGBoost's).
//
// Otherwise the keys stay 64 bits. The missing band and the zero band are
// still tested on the input's 64-bit key, before rounding, so they stay
// exact whatever their edges.

// Roundings of a double to a float, on its bits.
const (
	roundNone    = ""
	roundNearest = "nearest"
	roundUp      = "up"
	roundDown    = "down"
)

// round32Bits is the float nearest the double with bits b (not a NaN) in
// the direction mode gives, as float bits, computed with integer
// operations the way NAME_round32 computes it.
func round32Bits(b uint64, mode string) uint32 {
	neg := uint32(b >> 63)
	a := b &^ (1 << 63)
	e := uint32(a >> 52)
	sig := a & (1<<52 - 1)
	var m uint32
	var rest, half uint64
	switch {
	case e == 0x7ff:
		return neg<<31 | 0x7f800000
	case e >= 1151: // |x| >= 2^128: past FLT_MAX by more than half an ulp
		m, rest, half = 0x7f7fffff, 2, 1
	case e >= 897: // a normal float
		m, rest, half = (e-896)<<23|uint32(sig>>29), sig&(1<<29-1), 1<<28
	default: // a float subnormal, or zero
		ee := e
		if e == 0 {
			ee = 1
		} else {
			sig |= 1 << 52
		}
		sh := 926 - ee
		if sh >= 54 {
			m, rest, half = 0, b2u(sig != 0), 2
		} else {
			m, rest, half = uint32(sig>>sh), sig&(1<<sh-1), 1<<(sh-1)
		}
	}
	var inc bool
	switch mode {
	case roundUp:
		inc = rest != 0 && neg == 0
	case roundDown:
		inc = rest != 0 && neg == 1
	default:
		inc = rest > half || rest == half && m&1 == 1
	}
	if inc {
		m++
	}
	return neg<<31 | m
}

// b2u is 1 for true.
func b2u(b bool) uint64 {
	if b {
		return 1
	}
	return 0
}

// isFloat reports whether v is a float value (±Inf included).
func isFloat(v float64) bool { return float64(float32(v)) == v }

// roundFor is the rounding under which every cut of cuts (normalised to
// x <= c) meets a float, or roundNone.
func roundFor(cuts []float64) string {
	up, down := true, true
	for _, c := range cuts {
		up = up && isFloat(c)
		down = down && (math.IsInf(c, 1) || !math.IsInf(c, -1) && isFloat(math.Nextafter(c, math.Inf(1))))
	}
	switch {
	case up:
		return roundUp
	case down:
		return roundDown
	}
	return roundNone
}

// cut32 is the float a rounded input is compared with for cut c: c itself
// when rounding up or to nearest (the float32 pass's cuts are floats
// already), the float below next(c) when rounding down.
func cut32(c float64, mode string) float32 {
	if mode != roundDown || math.IsInf(c, 1) {
		return float32(c)
	}
	return math.Nextafter32(float32(math.Nextafter(c, math.Inf(1))), float32(math.Inf(-1)))
}

// writeRound32 writes NAME_round32, round32Bits in C.
func (bl *binnedLayout) writeRound32(g *gen, w *printer) {
	what := map[string]string{roundUp: "up (towards +infinity)", roundDown: "down (towards -infinity)",
		roundNearest: "to nearest, ties to even (as (float)x)"}[bl.round]
	w.line("/* The float bits of the double with bits b (not a NaN), rounded %s", what)
	w.line(" * with integer operations only: the cuts are floats, and comparing the rounded")
	w.line(" * input with them decides every split as comparing the double would. */")
	w.line("static uint32_t %s_round32(uint64_t b)", g.name)
	w.line("{")
	w.in()
	w.line("const uint32_t neg = (uint32_t)(b >> 63);")
	w.line("const uint32_t e = (uint32_t)(b >> 52) & 0x7ffu;")
	w.line("uint64_t sig = b & 0x000fffffffffffffull;")
	if bl.round == roundNearest {
		w.line("uint64_t rest, half;")
	} else {
		w.line("uint64_t rest;")
	}
	w.line("uint32_t m;")
	w.line("if (e == 0x7ffu) {")
	w.line("\treturn (neg << 31) | 0x7f800000u; /* an infinity */")
	w.line("}")
	half := func(v string) { // only rounding to nearest reads half
		if bl.round == roundNearest {
			w.line("\thalf = %s;", v)
		}
	}
	w.line("if (e >= 1151u) { /* |x| >= 2^128 */")
	w.line("\tm = 0x7f7fffffu;")
	w.line("\trest = 2u;")
	half("1u")
	w.line("} else if (e >= 897u) { /* a normal float: 23 of the 52 fraction bits kept */")
	w.line("\tm = ((e - 896u) << 23) | (uint32_t)(sig >> 29);")
	w.line("\trest = sig & 0x1fffffffu;")
	half("0x10000000u")
	w.line("} else { /* a float subnormal, or zero: units of 2^-149 */")
	w.in()
	w.line("uint32_t sh = 925u;")
	w.line("if (e != 0u) {")
	w.line("\tsig |= 0x0010000000000000ull;")
	w.line("\tsh = 926u - e;")
	w.line("}")
	w.line("if (sh >= 54u) {")
	w.line("\tm = 0u;")
	w.line("\trest = sig != 0u;")
	half("2u")
	w.line("} else {")
	w.line("\tm = (uint32_t)(sig >> sh);")
	w.line("\trest = sig & ((1ull << sh) - 1u);")
	half("1ull << (sh - 1u)")
	w.line("}")
	w.out()
	w.line("}")
	switch bl.round {
	case roundUp:
		w.line("m += (uint32_t)(rest != 0u && neg == 0u);")
	case roundDown:
		w.line("m += (uint32_t)(rest != 0u && neg != 0u);")
	default:
		w.line("m += (uint32_t)(rest > half || (rest == half && (m & 1u) != 0u));")
	}
	w.line("return (neg << 31) | m; /* a carry into the exponent is the next float up */")
	w.out()
	w.line("}")
	w.line("")
}

// chooseRound sets bl.round for a double build: nearest for a float32
// model's (tl.round32, set before the splits were collected), else up or
// down when every cut allows it.
func (bl *binnedLayout) chooseRound(g *gen, splits []tableSplit) {
	switch {
	case g.o.Float:
		bl.round = roundNone
	case bl.tl.round32:
		bl.round = roundNearest
	default:
		cuts := make([]float64, len(splits))
		for i, s := range splits {
			cuts[i] = cutOf(s)
		}
		bl.round = roundFor(cuts)
	}
}

// writeKey32 writes NAME_key32, the key of float bits.
func (bl *binnedLayout) writeKey32(g *gen, w *printer) {
	w.line("/* The key of float bits b (not a NaN): keys order as the floats do. */")
	w.line("static uint32_t %s_key32(uint32_t b)", g.name)
	w.line("{")
	w.line("\tif (b == 0x80000000u) {")
	w.line("\t\tb = 0; /* -0 is +0 to every comparison */")
	w.line("\t}")
	w.line("\treturn (b & 0x80000000u) != 0 ? ~b : b | 0x80000000u;")
	w.line("}")
	w.line("")
}
