package forest

import (
	"fmt"
	"math"
)

// IsMissing reports whether v, the (rounded) input seen at split node i of
// tree t, counts as missing there: step 1 of the format's "Meaning in
// version 2" (NaN, the model's missing_value, or, where zero_missing is set,
// |v| <= ZeroMissingBound).
func (f *Forest) IsMissing(t *Tree, i int, v float64) bool {
	return v != v || f.HasMissingValue && v == f.MissingValue ||
		t.ZeroMissing != nil && t.ZeroMissing[i] && math.Abs(v) <= ZeroMissingBound
}

// GoesLeft reports whether input vector x goes left at split node i of tree
// t: the value is rounded to float32 first for a float32 model, a missing
// value goes where MissingLeft says, a numeric split sends v left when
// v <= threshold, and a set split when v is a member of its categories under
// the model's category_match.
func (f *Forest) GoesLeft(t *Tree, i int, x []float64) bool {
	v := x[t.Feature[i]]
	if f.InputPrecision == Float32 {
		v = Round32(v)
	}
	switch {
	case f.IsMissing(t, i, v):
		return t.MissingLeft[i]
	case t.IsSetSplit(i):
		return f.CategoryMatch.IsMember(v, t.Categories[i])
	}
	return v <= t.Threshold[i]
}

// LeafIndex returns the leaf that row x reaches in tree t, following step 1
// of the format's "Meaning" (version 2's routing rules included). x holds
// one value per feature; NaN is missing.
func (f *Forest) LeafIndex(t *Tree, x []float64) int {
	i := 0
	for t.Left[i] != -1 {
		if f.GoesLeft(t, i, x) {
			i = t.Left[i]
		} else {
			i = t.Right[i]
		}
	}
	return i
}

// Predict scores one row into out, which must have NumOutputs entries. It is
// the reference: the format's "Meaning" (and "Meaning in version 2") step by
// step, additions in tree order. Under float32 accumulation every output is
// a float32 value, widened exactly.
func (f *Forest) Predict(x, out []float64) {
	f.PredictRaw(x, out)
	f.Finish(out)
}

// PredictRaw scores one row into out (NumOutputs entries) up to the joined
// score: the trees combined and base_score applied, before transform_scale
// and the output transform. These are the margins boosting libraries print
// when asked for raw scores.
func (f *Forest) PredictRaw(x, out []float64) {
	if len(x) != len(f.Features) || len(out) != f.NumOutputs() {
		panic(fmt.Sprintf("BUG: forest.Predict: %d inputs and %d outputs, want %d and %d",
			len(x), len(out), len(f.Features), f.NumOutputs()))
	}
	f32 := f.Accumulate == Float32
	switch {
	case f.Combine != Sum:
		clear(out)
	case f32:
		for j, b := range f.BaseScore {
			out[j] = Round32(b)
		}
	default:
		copy(out, f.BaseScore)
	}
	k := len(out)
	perOutput := false
	for ti := range f.Trees {
		t := &f.Trees[ti]
		leaf := t.Leaf(f.LeafIndex(t, x), k)
		switch {
		case f.Combine == Vote:
			out[Argmax(leaf)]++
		case t.HasOutput:
			perOutput = true
			out[t.Output] = add(f32, out[t.Output], leaf[0])
		default:
			for j, v := range leaf {
				out[j] = add(f32, out[j], v)
			}
		}
	}
	if f.Combine == Sum {
		return
	}
	n := float64(len(f.Trees))
	for j := range out {
		if perOutput {
			n = float64(f.treesAddingTo(j))
		}
		if f32 {
			// round32(acc/T) then round32(acc + round32(base)): one float32
			// operation each (T is exact in float32 below 2^24 trees).
			out[j] = float64(float32(out[j]) / float32(n))
			out[j] = float64(float32(out[j]) + float32(f.BaseScore[j]))
		} else {
			out[j] = out[j]/n + f.BaseScore[j]
		}
	}
}

// add is one addition of the accumulation: in float32 arithmetic (both
// operands are float32 values) or in float64.
func add(f32 bool, a, b float64) float64 {
	if f32 {
		return float64(float32(a) + float32(b))
	}
	return a + b
}

// treesAddingTo is the number of trees whose leaves add to output j: every
// tree, or, with per-output trees, those without an output plus those of j.
func (f *Forest) treesAddingTo(j int) int {
	n := 0
	for ti := range f.Trees {
		if f.Trees[ti].AddsTo(j) {
			n++
		}
	}
	return n
}

// Finish turns joined scores (PredictRaw's output) into the model's outputs
// in place: the transform scale, then the output transform, in the
// model's accumulation precision.
func (f *Forest) Finish(z []float64) {
	s := f.Scale()
	if f.Accumulate == Float32 {
		if s != 1 {
			s32 := float32(s)
			for j, v := range z {
				z[j] = float64(s32 * float32(v))
			}
		}
		ApplyTransform32(f.Transform, z)
		return
	}
	if s != 1 {
		for j, v := range z {
			z[j] = float64(v * s) // the conversion keeps the product from fusing with a later add
		}
	}
	ApplyTransform(f.Transform, z)
}

// ApplyTransform applies step 3 of the format's "Meaning" in place, in
// float64 (version 2's exp, logistic_each and normalize included).
func ApplyTransform(tr Transform, z []float64) {
	switch tr {
	case Logistic, LogisticEach:
		for j, v := range z {
			z[j] = Sigmoid(v)
		}
	case Exp:
		for j, v := range z {
			z[j] = math.Exp(v)
		}
	case Softmax:
		m := z[0]
		for _, v := range z[1:] {
			if v > m {
				m = v
			}
		}
		s := 0.0
		for j, v := range z {
			z[j] = math.Exp(v - m)
			s += z[j]
		}
		for j := range z {
			z[j] /= s
		}
	case Normalize:
		s := 0.0
		for _, v := range z {
			s += v
		}
		for j := range z {
			if s == 0 {
				z[j] = 0
			} else {
				z[j] /= s
			}
		}
	}
}

// ApplyTransform32 applies the output transform as "Meaning in version 2"
// specifies it under float32 accumulation, in place. The entries of z must
// be float32 values; so are the results. Every operation is one float32
// operation and the exponential is Expf: logistic is 1/(1+expf(−z)); exp is
// expf(z); softmax takes m = max z, e_i = expf(z_i − m), sums the e_i in
// float64 in order, rounds the sum to float32 and divides; normalize sums in
// float32 in order and gives zeros when the sum is zero.
func ApplyTransform32(tr Transform, z []float64) {
	switch tr {
	case Logistic, LogisticEach:
		for j, v := range z {
			z[j] = float64(Sigmoid32(float32(v)))
		}
	case Exp:
		for j, v := range z {
			z[j] = float64(Expf(float32(v)))
		}
	case Softmax:
		m := float32(z[0])
		for _, v := range z[1:] {
			if float32(v) > m {
				m = float32(v)
			}
		}
		s := 0.0
		for j, v := range z {
			e := Expf(float32(v) - m)
			z[j] = float64(e)
			s += float64(e)
		}
		s32 := float32(s)
		for j, v := range z {
			z[j] = float64(float32(v) / s32)
		}
	case Normalize:
		var s float32
		for _, v := range z {
			s += float32(v)
		}
		for j, v := range z {
			if s == 0 {
				z[j] = 0
			} else {
				z[j] = float64(float32(v) / s)
			}
		}
	}
}

// Sigmoid is the format's logistic function: 1/(1+e^(−z)) for z ≥ 0 and
// e^z/(1+e^z) for z < 0, the two forms that never overflow.
func Sigmoid(z float64) float64 {
	if z >= 0 {
		return 1 / (1 + math.Exp(-z))
	}
	e := math.Exp(z)
	return e / (1 + e)
}

// Sigmoid32 is the logistic function under float32 accumulation:
// round32(1 / round32(1 + expf(−z))), the form XGBoost computes.
func Sigmoid32(z float32) float32 {
	d := 1 + Expf(-z)
	return 1 / d
}

// PredictBatch scores rows laid out back to back (len(Features) values per
// row) and returns their outputs back to back (NumOutputs values per row).
func (f *Forest) PredictBatch(rows []float64) []float64 {
	p, k := len(f.Features), f.NumOutputs()
	n := len(rows) / p
	out := make([]float64, n*k)
	for r := 0; r < n; r++ {
		f.Predict(rows[r*p:(r+1)*p], out[r*k:(r+1)*k])
	}
	return out
}

// PredictClass returns the predicted class index of row x (step 4).
func (f *Forest) PredictClass(x []float64) int {
	out := make([]float64, f.NumOutputs())
	f.Predict(x, out)
	return f.ClassOf(out)
}
