package train

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// smallTable invents n rows of p features with few distinct values, so that
// ties and repeated draws are common.
func smallTable(n, p, classes int, seed uint64) *Data {
	rng := rand.New(rand.NewPCG(seed, 3))
	d := &Data{Task: forest.Classification}
	for j := range p {
		d.Features = append(d.Features, string(rune('a'+j)))
	}
	for c := range classes {
		d.Classes = append(d.Classes, string(rune('A'+c)))
	}
	if classes == 0 {
		d.Task, d.Classes = forest.Regression, nil
	}
	for range n {
		s := 0.0
		for j := range p {
			v := float64(rng.IntN(6)) / 2
			d.X = append(d.X, v)
			s += v * float64(j+1)
		}
		if classes == 0 {
			d.Y = append(d.Y, s+rng.NormFloat64())
		} else {
			d.Y = append(d.Y, float64((int(s)+rng.IntN(2))%classes))
		}
	}
	return d
}

// impurity is the weighted impurity of one side, computed from scratch:
// W·Gini = W − Σ_c W_c²/W for classes (Breiman, Friedman, Olshen, Stone
// 1984, "Classification and Regression Trees"), or the weighted sum of
// squared deviations from the mean for regression.
func impurity(t *table, w []int32, rows []int) float64 {
	if t.k > 0 {
		cnt := make([]float64, t.k)
		W := 0.0
		for _, r := range rows {
			cnt[t.class[r]] += float64(w[r])
			W += float64(w[r])
		}
		s := 0.0
		for _, c := range cnt {
			s += c * c
		}
		return W - s/W
	}
	W, S := 0.0, 0.0
	for _, r := range rows {
		W += float64(w[r])
		S += float64(w[r]) * t.y[r]
	}
	m := S / W
	e := 0.0
	for _, r := range rows {
		e += float64(w[r]) * (t.y[r] - m) * (t.y[r] - m)
	}
	return e
}

// The root split of a tree with mtry = p must be the best of all splits of
// the bootstrap sample, found here by brute force over every feature and
// every threshold between distinct values, with MinLeaf respected; its
// threshold is the midpoint of the neighbouring values (design.md).
func TestRootSplitIsOptimal(t *testing.T) {
	for _, c := range []struct {
		classes, minLeaf int
	}{{2, 1}, {3, 1}, {4, 7}, {0, 1}, {0, 5}} {
		d := smallTable(150, 4, c.classes, uint64(10+c.classes))
		rs, err := resolve(d, Settings{Trees: 1, Mtry: 4, MinLeaf: c.minLeaf, MaxDepth: 1})
		require.NoError(t, err)
		tb := newTable(d)
		g := newGrower(tb, rs)
		for seed := range 20 {
			tr := g.grow(treeRNG(uint64(seed), 0))
			var in []int
			for r, w := range g.w {
				if w > 0 {
					in = append(in, r)
				}
			}
			best, bestF, bestT := math.Inf(1), -1, 0.0
			for f := range tb.p {
				for _, r := range in {
					thr := tb.cols[f][r] // split "x <= value of r"
					var l, rr []int
					wl, wr := 0.0, 0.0
					for _, q := range in {
						if tb.cols[f][q] <= thr {
							l = append(l, q)
							wl += float64(g.w[q])
						} else {
							rr = append(rr, q)
							wr += float64(g.w[q])
						}
					}
					if len(rr) == 0 || wl < float64(c.minLeaf) || wr < float64(c.minLeaf) {
						continue
					}
					if imp := impurity(tb, g.w, l) + impurity(tb, g.w, rr); imp < best-1e-9 {
						best, bestF, bestT = imp, f, thr
					}
				}
			}
			if bestF < 0 || impurity(tb, g.w, in) < 1e-12 {
				assert.True(t, tr.IsLeaf(0), "classes %d, seed %d: no valid split, so a leaf", c.classes, seed)
				continue
			}
			require.False(t, tr.IsLeaf(0), "classes %d, seed %d", c.classes, seed)
			f, thr := tr.Feature[0], tr.Threshold[0]
			var l, rr []int
			for _, q := range in {
				if tb.cols[f][q] <= thr {
					l = append(l, q)
				} else {
					rr = append(rr, q)
				}
			}
			lo, hi := math.Inf(-1), math.Inf(1)
			for _, q := range l {
				lo = math.Max(lo, tb.cols[f][q])
			}
			for _, q := range rr {
				hi = math.Min(hi, tb.cols[f][q])
			}
			assert.Equal(t, (lo+hi)/2, thr, "the threshold is the midpoint of the neighbouring values %v and %v", lo, hi)
			got := impurity(tb, g.w, l) + impurity(tb, g.w, rr)
			assert.InDelta(t, best, got, 1e-9*math.Max(1, best), "classes %d, seed %d: split on %d at %v, best is %d at %v", c.classes, seed, f, thr, bestF, bestT)
		}
	}
}
