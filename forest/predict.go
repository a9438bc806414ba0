package forest

import (
	"fmt"
	"math"
)

// LeafIndex returns the leaf that row x reaches in tree t, following step 1
// of the format's "Meaning". x holds one value per feature; NaN is missing.
func (f *Forest) LeafIndex(t *Tree, x []float64) int {
	i := 0
	f32 := f.InputPrecision == Float32
	for t.Left[i] != -1 {
		v := x[t.Feature[i]]
		if f32 {
			v = Round32(v)
		}
		switch {
		case v != v: // missing
			if t.MissingLeft[i] {
				i = t.Left[i]
			} else {
				i = t.Right[i]
			}
		case v <= t.Threshold[i]:
			i = t.Left[i]
		default:
			i = t.Right[i]
		}
	}
	return i
}

// Predict scores one row into out, which must have NumOutputs entries. It is
// the reference: steps 1 to 3 of the format's "Meaning", additions in tree
// order.
func (f *Forest) Predict(x, out []float64) {
	if len(x) != len(f.Features) || len(out) != f.NumOutputs() {
		panic(fmt.Sprintf("BUG: forest.Predict: %d inputs and %d outputs, want %d and %d",
			len(x), len(out), len(f.Features), f.NumOutputs()))
	}
	k := len(out)
	switch f.Combine {
	case Sum:
		copy(out, f.BaseScore)
	default:
		clear(out)
	}
	for ti := range f.Trees {
		t := &f.Trees[ti]
		leaf := t.Leaf(f.LeafIndex(t, x), k)
		if f.Combine == Vote {
			out[Argmax(leaf)]++
			continue
		}
		for j, v := range leaf {
			out[j] += v
		}
	}
	if f.Combine != Sum {
		n := float64(len(f.Trees))
		for j := range out {
			out[j] = out[j]/n + f.BaseScore[j]
		}
	}
	ApplyTransform(f.Transform, out)
}

// ApplyTransform applies step 3 of the format's "Meaning" in place.
func ApplyTransform(tr Transform, z []float64) {
	switch tr {
	case Logistic:
		for j, v := range z {
			z[j] = Sigmoid(v)
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
