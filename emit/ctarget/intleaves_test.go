package ctarget

import (
	"math"
	"math/big"
	"path/filepath"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// intLeafCases are golden models of every transform integer leaves take:
// an average of votes, a sum with a logistic, softmax, exp (the logistic
// model with the exp transform instead: v2-exp's leaves reach 1e300, where
// no bound is finite), a regression average, gradient boosting over
// several classes.
var intLeafCases = []string{"sklearn-breast-cancer", "edge-logistic", "edge-softmax", "edge-logistic+exp", "trained-regression", "trained-wine", "v2-output-trees-softmax"}

func intLeafProgram(t *testing.T, name string) (*forest.Forest, *compile.Program, *forest.Rows) {
	t.Helper()
	name, exp := strings.CutSuffix(name, "+exp")
	dir := filepath.Join("..", "..", "golden", "testdata", name)
	f, err := forest.ReadFile(filepath.Join(dir, "model.json"))
	if err != nil {
		t.Fatal(err)
	}
	if exp {
		f.Task, f.Transform, f.Classes = forest.Regression, forest.Exp, nil
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	rows, err := forest.ReadRowsFile(filepath.Join(dir, "rows.csv"), f.Features, forest.RowOptions{})
	if err != nil {
		t.Fatal(err)
	}
	return f, p, rows
}

// The scale uses the leaf type's range to at least half, every scaled leaf
// fits it and is within half a unit of l*2^shift, and the largest sum fits
// the accumulator chosen.
func TestIntLeavesScale(t *testing.T) {
	for _, name := range intLeafCases {
		_, p, _ := intLeafProgram(t, name)
		for _, bits := range IntLeafBits {
			g, err := newGen(p, Options{IntLeaves: bits, Layout: emit.Table})
			if err != nil {
				t.Fatalf("%s int%d: %v", name, bits, err)
			}
			il, limit := g.il, int64(1)<<(bits-1)-1
			var most int64
			for ti := range p.Trees { // the model's own leaves, not g's dequantized ones
				for ni, n := range p.Trees[ti].Nodes {
					for c, v := range n.Value {
						q := il.q(v)
						most = max(most, q, -q)
						d := new(big.Float).SetFloat64(math.Ldexp(v, il.shift))
						d.Sub(d, new(big.Float).SetInt64(q)).Abs(d)
						if d.Cmp(big.NewFloat(0.5)) > 0 {
							t.Errorf("%s int%d: tree %d: leaf %v scales to %d, %v away", name, bits, ti, v, q, d)
						}
						if n.IsLeaf() && il.q(v) != il.q(g.leaves[ti][ni][c]) {
							t.Errorf("%s int%d: tree %d: stored leaf differs", name, bits, ti)
						}
					}
				}
			}
			if most > limit || most <= limit/2 {
				t.Errorf("%s int%d: largest scaled leaf %d, want in (%d, %d]", name, bits, most, limit/2, limit)
			}
			accMax := map[string]int64{"int32_t": math.MaxInt32, "int64_t": math.MaxInt64}[il.acc]
			if il.maxSum >= accMax {
				t.Errorf("%s int%d: sums reach %d, beyond %s", name, bits, il.maxSum, il.acc)
			}
		}
	}
}

// scaledEval scores x as the integer-leaf build does, in Go: integer sums
// of round(l*2^shift), divided by 2^(shift+skew) (skew 0 is right; another
// plants a wrong scale), then the base, the average and the interpreter's
// own finish.
func scaledEval(p *compile.Program, il *intLeaves, skew int, x, out []float64) {
	s := make([]int64, p.NumOutputs)
	for ti := range p.Trees {
		t := &p.Trees[ti]
		for c, v := range p.Leaf(t, x) {
			j := c
			if t.HasOutput && p.NumOutputs > 1 {
				j = t.Output
			}
			s[j] += il.q(v)
		}
	}
	for j := range s {
		out[j] = math.Ldexp(float64(s[j]), -il.shift-skew)
		if p.Combine == forest.Sum {
			out[j] += p.BaseScore[j]
		} else {
			out[j] = out[j]/float64(p.TreesAddingTo(j)) + p.BaseScore[j]
		}
	}
	(&forest.Forest{Accumulate: p.Accumulate, TransformScale: p.TransformScale, Transform: p.Transform}).Finish(out)
}

// The derived bound holds on every golden row for the scaled arithmetic,
// and a scale off by a factor of two breaks it somewhere: the bound is not
// so loose that a wrong scale hides under it.
func TestIntLeavesBoundHolds(t *testing.T) {
	for _, name := range intLeafCases {
		_, p, rows := intLeafProgram(t, name)
		for _, bits := range IntLeafBits {
			g, err := newGen(p, Options{IntLeaves: bits, Layout: emit.Table})
			if err != nil {
				t.Fatal(err)
			}
			worst, skewed := 0.0, 0.0
			want, got := make([]float64, p.NumOutputs), make([]float64, p.NumOutputs)
			for i := 0; i < rows.Len(); i++ {
				compile.Eval(p, rows.Row(i), want)
				for _, skew := range []int{0, 1} {
					scaledEval(p, g.il, skew, rows.Row(i), got)
					for j := range want {
						r := math.Abs(got[j]-want[j]) / g.il.bound[j]
						if skew == 0 {
							worst = math.Max(worst, r)
						} else {
							skewed = math.Max(skewed, r)
						}
					}
				}
			}
			t.Logf("%s int%d: shift %d, bound %.3g, measured error up to %.3g of it; with the scale halved %.3g", name, bits, g.il.shift, g.il.bound[0], worst, skewed)
			if worst > 1 {
				t.Errorf("%s int%d: an output is %.3g times the bound away", name, bits, worst)
			}
			if skewed <= 1 {
				t.Errorf("%s int%d: a wrong scale stays within the bound", name, bits)
			}
		}
	}
}

// The threshold on the integer sum decides exactly as the real output
// against 0.5: every sum around the cut, checked in rational arithmetic.
func TestIntLeavesThresholdCut(t *testing.T) {
	_, p, _ := intLeafProgram(t, "edge-logistic")
	g, err := newGen(p, Options{IntLeaves: 16, Layout: emit.Table})
	if err != nil {
		t.Fatal(err)
	}
	il := g.il
	if il.label != "threshold" {
		t.Fatalf("label %q, want threshold", il.label)
	}
	for s := il.cut - 3; s <= il.cut+3; s++ {
		z := new(big.Rat).SetFrac(big.NewInt(s), new(big.Int).Lsh(big.NewInt(1), uint(il.shift)))
		z.Add(z, new(big.Rat).SetFloat64(g.base[0]))
		above := z.Sign() > 0 // the logistic is above 0.5 exactly when z > 0
		if above != (s > il.cut) {
			t.Errorf("sum %d: z %s, above 0.5 %v, but the cut %d says %v", s, z.FloatString(20), above, il.cut, s > il.cut)
		}
	}
}

// Emitted text: the scale, the bound and the integer entry point are in
// the header; nested and normalize are refused saying why.
func TestIntLeavesEmit(t *testing.T) {
	_, p, _ := intLeafProgram(t, "edge-logistic")
	files, err := Emit(p, Options{Name: "pump", IntLeaves: 16})
	if err != nil {
		t.Fatal(err)
	}
	h := string(files[0].Data)
	for _, want := range []string{"LOSSY", "#define PUMP_LEAF_SHIFT", "void pump_predict_scaled(const double *x, int32_t *s);", "out[0] within"} {
		if !strings.Contains(h, want) {
			t.Errorf("pump.h lacks %q", want)
		}
	}
	if _, err := Emit(p, Options{IntLeaves: 16, Layout: emit.Nested}); err == nil || !strings.Contains(err.Error(), "nested") {
		t.Errorf("nested with integer leaves: %v", err)
	}
	_, pn, _ := intLeafProgram(t, "v2-normalize")
	if _, err := Emit(pn, Options{IntLeaves: 16}); err == nil || !strings.Contains(err.Error(), "normalize") {
		t.Errorf("normalize with integer leaves: %v", err)
	}
	_, pe, _ := intLeafProgram(t, "v2-exp")
	if _, err := Emit(pe, Options{IntLeaves: 16}); err == nil || !strings.Contains(err.Error(), "no finite error bound") {
		t.Errorf("exp of leaves up to 1e300 with integer leaves: %v", err)
	}
	if _, err := Emit(p, Options{IntLeaves: 8}); err == nil {
		t.Error("8-bit leaves: no error")
	}
}
