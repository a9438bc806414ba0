package ctarget

// This file writes the emitted C's floating-point assumptions as code: what
// exactness needs of the compiler is checked with #error at compile time
// (unless the user defines NAME_ALLOW_INEXACT_FP), and what it needs of the
// floating-point unit at run time is NAME_fp_check, to call at start-up.

// fpAllowMacro is the macro a user defines to build where the compile-time
// checks fail, accepting outputs that may differ from the interpreter's.
func (g *gen) fpAllowMacro() string { return g.upper + "_ALLOW_INEXACT_FP" }

// fpHeaderDoc is the header's paragraph on the checks.
func (g *gen) fpHeaderDoc(w *printer) {
	w.line(" * These assumptions are code: %s.c stops with #error where FLT_EVAL_METHOD,", g.name)
	if g.ft == "float" {
		w.line(" * FLT_MANT_DIG or FLT_RADIX (float.h) break them; define %s", g.fpAllowMacro())
	} else {
		w.line(" * DBL_MANT_DIG or FLT_RADIX (float.h) break them; define %s", g.fpAllowMacro())
	}
	w.line(" * to build anyway. Call %s_fp_check() once at start-up: it is 0 where", g.name)
	w.line(" * the floating-point unit keeps subnormals and rounds to nearest, else it")
	w.line(" * says what is wrong (%s_FP_FLUSHES_SUBNORMALS, %s_FP_SUBNORMAL_INPUTS_ZERO,", g.upper, g.upper)
	w.line(" * %s_FP_NOT_NEAREST), and outputs may then differ.", g.upper)
}

// fpHeaderDecl declares NAME_fp_check and its bits.
func (g *gen) fpHeaderDecl(w *printer) {
	u := g.upper
	w.line("")
	w.line("/* Checks at run time what exact scoring needs of the floating-point unit:")
	w.line(" * 0 when it holds, else a combination of these bits. Flush-to-zero and")
	w.line(" * denormals-are-zero modes (set by some start-up code, or by -ffast-math's")
	w.line(" * crtfastmath.o) and a rounding mode other than to nearest change outputs. */")
	w.line("#define %s_FP_FLUSHES_SUBNORMALS 1", u)
	w.line("#define %s_FP_SUBNORMAL_INPUTS_ZERO 2", u)
	w.line("#define %s_FP_NOT_NEAREST 4", u)
	w.line("int %s_fp_check(void);", g.name)
}

// fpSourceChecks writes the compile-time checks (NAME.c, after the
// includes, which bring in float.h).
func (g *gen) fpSourceChecks(w *printer) {
	allow := g.fpAllowMacro()
	w.line("")
	w.line("/* Exactness needs IEEE 754 arithmetic evaluated in its own type (see %s.h);", g.name)
	w.line(" * define %s to build where these checks fail. */", allow)
	w.line("#ifndef %s", allow)
	w.line("#if FLT_RADIX != 2")
	w.line("#error \"%s.c: FLT_RADIX is not 2: not binary floating point (define %s to build anyway)\"", g.name, allow)
	w.line("#endif")
	if g.ft == "double" {
		w.line("#if DBL_MANT_DIG != 53")
		w.line("#error \"%s.c: double is not IEEE 754 binary64 (DBL_MANT_DIG != 53): build with 64-bit doubles, e.g. avr-gcc -mdouble=64, or emit float C (define %s to build anyway)\"", g.name, allow)
		w.line("#endif")
	}
	if g.at == "float" || g.ft == "float" {
		w.line("#if FLT_MANT_DIG != 24")
		w.line("#error \"%s.c: float is not IEEE 754 binary32 (FLT_MANT_DIG != 24) (define %s to build anyway)\"", g.name, allow)
		w.line("#endif")
	}
	switch {
	case g.f32:
		w.line("#if !defined(FLT_EVAL_METHOD) || FLT_EVAL_METHOD != 0")
		w.line("#error \"%s.c: float32 accumulation needs FLT_EVAL_METHOD 0: build with SSE (-msse2 -mfpmath=sse) or another IEEE float unit (define %s to build anyway)\"", g.name, allow)
		w.line("#endif")
	case g.ft == "double":
		w.line("#if !defined(FLT_EVAL_METHOD) || (FLT_EVAL_METHOD != 0 && FLT_EVAL_METHOD != 1)")
		w.line("#error \"%s.c: double operations must round to double (FLT_EVAL_METHOD 0 or 1): with x87 build with -msse2 -mfpmath=sse (define %s to build anyway)\"", g.name, allow)
		w.line("#endif")
	default:
		w.line("#if !defined(FLT_EVAL_METHOD) || FLT_EVAL_METHOD < 0")
		w.line("#error \"%s.c: FLT_EVAL_METHOD is indeterminable (define %s to build anyway)\"", g.name, allow)
		w.line("#endif")
	}
	w.line("#endif")
}

// fpCheckFunc writes NAME_fp_check. Every operand passes through a volatile
// so that the compiler cannot fold the test away at build time.
func (g *gen) fpCheckFunc(w *printer) {
	t, min, eps, suffix := "double", "DBL_MIN", "DBL_EPSILON", ""
	if g.ft == "float" {
		t, min, eps, suffix = "float", "FLT_MIN", "FLT_EPSILON", "f"
	}
	u := g.upper
	w.line("")
	w.line("int %s_fp_check(void)", g.name)
	w.line("{")
	w.in()
	w.line("volatile %s smallest = %s, two = 2.0%s, one = 1.0%s;", t, min, suffix, suffix)
	w.line("volatile %s up = %s * 0.75%s, down = %s * 0.25%s;", t, eps, suffix, eps, suffix)
	w.line("%s half;", t)
	w.line("int bad = 0;")
	w.line("half = smallest / two; /* a subnormal; 0 when results flush to zero */")
	w.line("if (half == 0.0%s) {", suffix)
	w.line("\tbad |= %s_FP_FLUSHES_SUBNORMALS;", u)
	w.line("} else {")
	w.line("\tvolatile %s sub = half;", t)
	w.line("\tif (sub * two != smallest) { /* a subnormal operand read as 0 */")
	w.line("\t\tbad |= %s_FP_SUBNORMAL_INPUTS_ZERO;", u)
	w.line("\t}")
	w.line("}")
	w.line("/* To nearest, 1 + 3/4 ulp rounds up and 1 + 1/4 ulp down. */")
	w.line("if (one + up != one + %s || one + down != one) {", eps)
	w.line("\tbad |= %s_FP_NOT_NEAREST;", u)
	w.line("}")
	w.line("return bad;")
	w.out()
	w.line("}")
}
