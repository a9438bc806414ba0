package ctarget

import (
	"errors"
	"fmt"
	"strconv"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// resolveIntLeaves is Resolve under Options.IntLeaves: the leaves are
// tables of integers, so the table and binned layouts; auto takes binned,
// whose walk needs no floating point either, where the model bins.
func resolveIntLeaves(p *compile.Program, o Options) (string, string, error) {
	switch o.Layout {
	case emit.Nested:
		return "", "", &emit.Unsupported{Target: Name, Construct: "integer leaves in the nested layout, which has no leaf tables",
			Hint: "use --layout binned (or table, or auto)"}
	case Bitvector:
		return emit.Table, "bitvector asked for, but integer leaves are written in the table and binned layouts: the table layout instead", nil
	case "", emit.Auto:
		var u *emit.Unsupported
		if errors.As(binnable(p), &u) {
			return emit.Table, fmt.Sprintf("integer leaves; %s is a set split, which no cut of one feature can test: the table layout", u.Where), nil
		}
		return emit.Binned, "integer leaves: binned, whose walk needs no floating point either", nil
	}
	return resolveLayout(p, o)
}

// scaledStart opens NAME_predict_scaled, which sets acc to the scaled
// integer sums of the leaves (the base score is not in them).
func (g *gen) scaledStart(w *printer, locals []string) {
	w.line("void %s_predict_scaled(const %s *x, %s *acc)", g.name, g.ft, g.il.acc)
	w.line("{")
	w.in()
	w.line("int j;")
	for _, l := range locals {
		w.line("%s", l)
	}
	w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
	w.line("\tacc[j] = 0;")
	w.line("}")
}

// finishScaled closes NAME_predict_scaled and writes NAME_predict, which
// turns the sums into the model's z (exactly: the scale is a power of two)
// and finishes as the exact build does, and NAME_predict_class, on the sums
// when chooseLabel allows.
func (g *gen) finishScaled(w *printer) {
	p, il := g.p, g.il
	w.out()
	w.line("}")
	w.line("")
	w.line("void %s_predict(const %s *x, %s *out)", g.name, g.ft, g.ft)
	w.line("{")
	w.in()
	w.line("%s sums[%s_NUM_OUTPUTS];", il.acc, g.upper)
	w.line("%s acc[%s_NUM_OUTPUTS];", g.at, g.upper)
	w.line("int j;")
	w.line("%s_predict_scaled(x, sums);", g.name)
	w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
	if g.at == "float" {
		w.line("\tacc[j] = (float)sums[j]; /* rounded once past 2^24: within the bound */")
	} else {
		w.line("\tacc[j] = (double)sums[j]; /* exact: |sums| < 2^53 */")
	}
	w.line("\tacc[j] = acc[j] / %s; /* a power of two: exact */", g.alit(il.scale))
	w.line("}")
	if p.Combine != forest.Average {
		for j := 0; j < p.NumOutputs; j++ {
			w.line("acc[%d] = acc[%d] + %s;", j, j, g.alit(g.base[j]))
		}
	}
	if il.label == "" {
		g.finish(w)
		return
	}
	g.finishBody(w)
	w.out()
	w.line("}")
	w.line("")
	w.line("int %s_predict_class(const %s *x)", g.name, g.ft)
	w.line("{")
	w.in()
	w.line("%s s[%s_NUM_OUTPUTS];", il.acc, g.upper)
	if il.label == "threshold" {
		w.line("%s_predict_scaled(x, s);", g.name)
		w.line("return s[0] > %s ? 1 : 0; /* the output is above 0.5 exactly then, in real arithmetic */", il.sumLit(il.cut))
	} else {
		g.argmaxLines(w, "s", "_predict_scaled")
	}
	w.out()
	w.line("}")
}

// intLeavesDoc writes the header's paragraph on the integer leaves: the
// scale, the accumulator and the bound per output.
func (g *gen) intLeavesDoc(w *printer) {
	il := g.il
	w.line(" *")
	w.line(" * LOSSY: integer leaves. Every leaf value l is stored as round(l * 2^%d), an", il.shift)
	w.line(" * %s, and %s_predict_scaled adds them in %s (the largest sum the", il.leafType(), g.name, il.acc)
	w.line(" * model can reach is %d, the sum of each tree's largest |leaf|: no overflow).", il.maxSum)
	w.line(" * %s_predict divides the sums by 2^%d (exact), adds the base and", g.name, il.shift)
	w.line(" * finishes as above. Each output is within these bounds of the exact")
	w.line(" * model's, derived from each leaf's rounding, through the average and the")
	w.line(" * transform (logistic slope <= 1/4, softmax <= 1/2 in the max norm), plus")
	w.line(" * floating-point rounding:")
	for j, b := range il.bound {
		w.line(" *   out[%d] within %s", j, strconv.FormatFloat(b, 'g', 3, 64))
	}
	switch il.label {
	case "threshold":
		w.line(" * %s_predict_class decides on the integer sum alone (s[0] > %d), with", g.name, il.cut)
		w.line(" * no floating-point operation; it agrees with the exact model wherever")
		w.line(" * the exact output is more than twice the bound away from 0.5.")
	case "argmax":
		w.line(" * %s_predict_class is the argmax of the integer sums, with no", g.name)
		w.line(" * floating-point operation; it agrees with the exact model wherever the")
		w.line(" * exact top two outputs are more than twice the bound apart.")
	}
}

// intLeavesDecl declares NAME_predict_scaled and the scale's macros.
func (g *gen) intLeavesDecl(w *printer) {
	il := g.il
	w.line("")
	w.line("#include <stdint.h>")
	w.line("")
	w.line("/* Leaves are scaled by 2^%s_LEAF_SHIFT (lossy: see above). */", g.upper)
	w.line("#define %s_LEAF_SHIFT %d", g.upper, il.shift)
	w.line("")
	w.line("/* The sums of the scaled integer leaves x reaches, one per output, without")
	w.line(" * the base score: z_j is base_j + s[j] / 2^%s_LEAF_SHIFT (for an average,", g.upper)
	w.line(" * divided by the number of trees before the base is added). */")
	w.line("void %s_predict_scaled(const %s *x, %s *s);", g.name, g.ft, il.acc)
}
