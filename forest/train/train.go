package train

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"strconv"
	"sync"
	"sync/atomic"

	"github.com/sawmill-dev/sawmill/forest"
)

// DefaultTrees is the number of trees grown when Settings.Trees is 0.
const DefaultTrees = 500

// Settings are the knobs of a random forest. Zero values mean the defaults.
type Settings struct {
	Trees int // number of trees; default DefaultTrees
	// Mtry is the number of features examined at each node; default ⌊√p⌋
	// for classification and max(1, ⌊p/3⌋) for regression (Breiman 2001).
	Mtry int
	// MinLeaf is the least number of bootstrap draws in a leaf; default 1
	// for classification and 5 for regression (common practice).
	MinLeaf  int
	MaxDepth int // deepest node depth, the root being 0; 0 = unlimited
	// MaxBins, when not 0, puts every split on one of at most MaxBins−1
	// quantile edges of its feature's training column (see bins.go), so
	// that thresholds repeat and the binned C layout stays small; at
	// least 2.
	MaxBins int
	// SampleFraction scales the bootstrap: each tree draws
	// round(SampleFraction·n) rows with replacement; default 1.
	SampleFraction float64
	Seed           uint64
	Threads        int // parallel workers; default runtime.GOMAXPROCS(0)
	// SkipImportance skips the permutation importance, which costs one
	// tree walk per out-of-bag row, feature and tree.
	SkipImportance bool
	// Progress, when set, is called after each tree is finished, in tree
	// order, with the number done so far; never from two goroutines at once.
	Progress func(done, total int)
}

// DefaultMtry is Breiman's default number of features tried per node for p
// features: ⌊√p⌋ for classification, max(1, ⌊p/3⌋) for regression
// (Breiman 2001; the same defaults as his Fortran program).
func DefaultMtry(task forest.Task, p int) int {
	if task == forest.Regression {
		return max(1, p/3)
	}
	return max(1, int(math.Sqrt(float64(p))))
}

// DefaultMinLeaf is the default least number of draws in a leaf.
func DefaultMinLeaf(task forest.Task) int {
	if task == forest.Regression {
		return 5
	}
	return 1
}

// Result is a trained forest and its out-of-bag figures (also stored in
// the forest's provenance).
type Result struct {
	Forest *forest.Forest
	OOB    OOB
}

// OOB holds the out-of-bag estimates; see the package comment.
type OOB struct {
	Rows  int     // rows left out by at least one tree: the rows scored
	Error float64 // misclassification rate or MSE over those rows; NaN if none
	R2    float64 // regression only: 1 − SSE/SST over those rows; NaN otherwise
	Curve []CurvePoint
	// Share is the mean over trees of the share of rows a tree left out.
	Share float64
	// Importance is, per feature, the mean increase of a tree's out-of-bag
	// error when the feature is permuted; nil when skipped.
	Importance []float64
}

// CurvePoint is the out-of-bag error of the first Trees trees.
type CurvePoint struct {
	Trees int
	Error float64
}

// SettingError is a setting out of its range. Name is the setting as the
// command line spells it (mtry, min-leaf, sample-fraction, ...).
type SettingError struct {
	Name, Value, Problem string
}

func (e *SettingError) Error() string { return e.Name + " " + e.Value + ": " + e.Problem }

// resolved are the settings with defaults applied and checked.
type resolved struct {
	trees, mtry, maxDepth, draws, threads int
	maxBins                               int
	minLeaf                               float64
	fraction                              float64
	minLeafInt                            int
}

func resolve(d *Data, s Settings) (*resolved, error) {
	p, n := len(d.Features), d.Len()
	r := &resolved{trees: s.Trees, mtry: s.Mtry, maxDepth: s.MaxDepth, maxBins: s.MaxBins, threads: s.Threads, fraction: s.SampleFraction, minLeafInt: s.MinLeaf}
	if r.trees == 0 {
		r.trees = DefaultTrees
	}
	if r.mtry == 0 {
		r.mtry = DefaultMtry(d.Task, p)
	}
	if r.minLeafInt == 0 {
		r.minLeafInt = DefaultMinLeaf(d.Task)
	}
	if r.fraction == 0 {
		r.fraction = 1
	}
	if r.threads == 0 {
		r.threads = runtime.GOMAXPROCS(0)
	}
	bad := func(name string, v any, problem string) error {
		return &SettingError{Name: name, Value: fmt.Sprint(v), Problem: problem}
	}
	switch {
	case r.trees < 0:
		return nil, bad("trees", s.Trees, "must be at least 1")
	case r.mtry < 1 || r.mtry > p:
		return nil, bad("mtry", s.Mtry, fmt.Sprintf("must be between 1 and %d, the number of features", p))
	case r.minLeafInt < 1:
		return nil, bad("min-leaf", s.MinLeaf, "must be at least 1")
	case r.maxDepth < 0:
		return nil, bad("max-depth", s.MaxDepth, "must be 0 (unlimited) or more")
	case r.maxBins < 0 || r.maxBins == 1:
		return nil, bad("max-bins", s.MaxBins, "must be 0 (no bins) or at least 2")
	case !(r.fraction > 0) || math.IsInf(r.fraction, 0):
		return nil, bad("sample-fraction", s.SampleFraction, "must be a number above 0")
	case r.threads < 1:
		return nil, bad("threads", s.Threads, "must be at least 1")
	}
	r.minLeaf = float64(r.minLeafInt)
	draws := math.Round(r.fraction * float64(n))
	if draws > math.MaxInt32 {
		return nil, bad("sample-fraction", s.SampleFraction, fmt.Sprintf("%v draws per tree is too many", draws))
	}
	r.draws = max(1, int(draws))
	r.threads = min(r.threads, r.trees)
	return r, nil
}

// treeRNG is tree i's generator: a PCG seeded by SplitMix64 mixes of the
// forest seed and the tree index, independent of the thread that grows it.
func treeRNG(seed uint64, i int) *rand.Rand {
	a := splitmix(seed ^ splitmix(uint64(2*i)))
	b := splitmix(seed ^ splitmix(uint64(2*i+1)))
	return rand.New(rand.NewPCG(a, b))
}

// splitmix is SplitMix64's finaliser (Steele, Lea, Flood 2014).
func splitmix(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// treeResult is what a worker hands over for one tree.
type treeResult struct {
	tree    forest.Tree
	oobRows []int32   // rows the tree did not draw, ascending
	oobLeaf []int32   // the leaf each of them reaches
	delta   []float64 // per feature: increase in the tree's OOB error when permuted
}

// Train grows a random forest on d.
func Train(d *Data, s Settings) (*Result, error) {
	if err := d.check(); err != nil {
		return nil, err
	}
	rs, err := resolve(d, s)
	if err != nil {
		return nil, err
	}
	t := newTable(d)
	if rs.maxBins > 0 {
		t.binColumns(rs.maxBins)
	}
	acc := newOOBAcc(t, rs.trees, !s.SkipImportance)

	trees := make([]forest.Tree, rs.trees)
	var (
		mu      sync.Mutex
		pending = make([]*treeResult, rs.trees)
		next    int // trees committed so far
	)
	commit := func(i int, r *treeResult) {
		mu.Lock()
		defer mu.Unlock()
		pending[i] = r
		for next < rs.trees && pending[next] != nil {
			r := pending[next]
			pending[next] = nil
			trees[next] = r.tree
			acc.add(r)
			next++
			if isCurvePoint(next, rs.trees) {
				acc.curvePoint(next)
			}
			if s.Progress != nil {
				s.Progress(next, rs.trees)
			}
		}
	}

	var counter atomic.Int64
	var wg sync.WaitGroup
	for range rs.threads {
		wg.Add(1)
		go func() {
			defer wg.Done()
			g := newGrower(t, rs)
			for {
				i := int(counter.Add(1) - 1)
				if i >= rs.trees {
					return
				}
				rng := treeRNG(s.Seed, i)
				r := &treeResult{tree: g.grow(rng)}
				g.outOfBag(r, rng, !s.SkipImportance)
				commit(i, r)
			}
		}()
	}
	wg.Wait()
	if next != rs.trees {
		panic(fmt.Sprintf("BUG: train: %d of %d trees committed", next, rs.trees))
	}

	k := max(t.k, 1)
	f := &forest.Forest{
		Task:           d.Task,
		Features:       append([]string(nil), d.Features...),
		Classes:        append([]string(nil), d.Classes...),
		InputPrecision: forest.Float64,
		Combine:        forest.Average,
		Transform:      forest.NoTransform,
		BaseScore:      make([]float64, k),
		Trees:          trees,
	}
	if d.Task == forest.Regression {
		f.Classes = nil
	}
	oob := acc.result()
	f.Provenance = provenanceJSON(d, rs, s.Seed, &oob)
	if err := f.Validate("trained forest"); err != nil {
		panic("BUG: train: " + err.Error())
	}
	return &Result{Forest: f, OOB: oob}, nil
}

// outOfBag finds the tree's out-of-bag rows and leaves and, when asked, the
// permutation importance deltas, drawing permutations from the tree's rng.
func (g *grower) outOfBag(r *treeResult, rng *rand.Rand, importance bool) {
	t := g.t
	tr := &r.tree
	for row, c := range g.w {
		if c == 0 {
			r.oobRows = append(r.oobRows, int32(row))
			r.oobLeaf = append(r.oobLeaf, int32(leafOf(tr, t.cols, row)))
		}
	}
	if !importance || len(r.oobRows) == 0 {
		return
	}
	k := max(t.k, 1)
	// loss of the tree's own prediction at leaf l for row row
	loss := func(l, row int) float64 {
		v := tr.Value[l*k : (l+1)*k]
		if t.k > 0 {
			if forest.Argmax(v) != int(t.class[row]) {
				return 1
			}
			return 0
		}
		e := v[0] - t.y[row]
		return e * e
	}
	base := 0.0
	for i, row := range r.oobRows {
		base += loss(int(r.oobLeaf[i]), int(row))
	}
	used := make([]bool, t.p)
	for i, f := range tr.Feature {
		if tr.Left[i] != -1 {
			used[f] = true
		}
	}
	r.delta = make([]float64, t.p)
	perm := make([]int32, len(r.oobRows))
	nOOB := float64(len(r.oobRows))
	for f := range t.p {
		if !used[f] {
			continue // the tree never reads f: permuting it changes nothing
		}
		copy(perm, r.oobRows)
		rng.Shuffle(len(perm), func(i, j int) { perm[i], perm[j] = perm[j], perm[i] })
		col := t.cols[f]
		e := 0.0
		for i, row := range r.oobRows {
			l := leafOfPermuted(tr, t.cols, int(row), f, col[perm[i]])
			e += loss(l, int(row))
		}
		r.delta[f] = (e - base) / nOOB
	}
}

// isCurvePoint says whether the OOB curve records the error after t of
// total trees: every tree up to 10, every 10th up to 100, every 50th up to
// 1000, every 500th beyond, and the last.
func isCurvePoint(t, total int) bool {
	switch {
	case t == total, t <= 10:
		return true
	case t <= 100:
		return t%10 == 0
	case t <= 1000:
		return t%50 == 0
	}
	return t%500 == 0
}

// oobAcc accumulates out-of-bag predictions in tree order.
type oobAcc struct {
	t          *table
	k          int
	sum        []float64 // per row, the sum of its OOB trees' leaf vectors
	count      []int32   // per row, the number of its OOB trees
	trees      int
	shareSum   float64
	importance bool
	impSum     []float64
	impTrees   int
	curve      []CurvePoint
}

func newOOBAcc(t *table, trees int, importance bool) *oobAcc {
	k := max(t.k, 1)
	return &oobAcc{t: t, k: k, sum: make([]float64, t.n*k), count: make([]int32, t.n),
		importance: importance, impSum: make([]float64, t.p)}
}

func (a *oobAcc) add(r *treeResult) {
	k := a.k
	for i, row := range r.oobRows {
		v := r.tree.Value[int(r.oobLeaf[i])*k : (int(r.oobLeaf[i])+1)*k]
		s := a.sum[int(row)*k : (int(row)+1)*k]
		for c, x := range v {
			s[c] += x
		}
		a.count[row]++
	}
	a.trees++
	a.shareSum += float64(len(r.oobRows)) / float64(a.t.n)
	if r.delta != nil {
		for f, d := range r.delta {
			a.impSum[f] += d
		}
		a.impTrees++
	}
}

// errorNow is the OOB error of the trees added so far, the rows scored, and
// for regression the R².
func (a *oobAcc) errorNow() (e float64, rows int, r2 float64) {
	t, k := a.t, a.k
	bad, sse := 0, 0.0
	var ys []float64
	for row, c := range a.count {
		if c == 0 {
			continue
		}
		rows++
		s := a.sum[row*k : (row+1)*k]
		if t.k > 0 {
			if forest.Argmax(s) != int(t.class[row]) {
				bad++
			}
			continue
		}
		d := s[0]/float64(c) - t.y[row]
		sse += d * d
		ys = append(ys, t.y[row])
	}
	r2 = math.NaN()
	if rows == 0 {
		return math.NaN(), 0, r2
	}
	if t.k > 0 {
		return float64(bad) / float64(rows), rows, r2
	}
	mean := 0.0
	for _, y := range ys {
		mean += y
	}
	mean /= float64(len(ys))
	sst := 0.0
	for _, y := range ys {
		sst += (y - mean) * (y - mean)
	}
	if sst > 0 {
		r2 = 1 - sse/sst
	}
	return sse / float64(rows), rows, r2
}

func (a *oobAcc) curvePoint(trees int) {
	e, _, _ := a.errorNow()
	a.curve = append(a.curve, CurvePoint{Trees: trees, Error: e})
}

func (a *oobAcc) result() OOB {
	e, rows, r2 := a.errorNow()
	o := OOB{Rows: rows, Error: e, R2: r2, Curve: a.curve, Share: a.shareSum / float64(a.trees)}
	if a.importance {
		o.Importance = make([]float64, len(a.impSum))
		if a.impTrees > 0 {
			for f, s := range a.impSum {
				o.Importance[f] = s / float64(a.impTrees)
			}
		}
	}
	return o
}

// ImportanceMethod names, in provenance, how importance was measured.
const ImportanceMethod = "per-tree permutation among the tree's out-of-bag rows: mean increase of the tree's out-of-bag error"

type provSettings struct {
	Task           forest.Task `json:"task"`
	Label          string      `json:"label,omitempty"`
	Trees          int         `json:"trees"`
	Mtry           int         `json:"mtry"`
	MinLeaf        int         `json:"min_leaf"`
	MaxDepth       int         `json:"max_depth"`
	MaxBins        int         `json:"max_bins,omitempty"`
	SampleFraction float64     `json:"sample_fraction"`
	Seed           uint64      `json:"seed"`
}

type provCurve struct {
	Trees []int     `json:"trees"`
	Error []float64 `json:"error"`
}

// orderedFloats is a JSON object whose keys keep the given order.
type orderedFloats struct {
	keys []string
	vals []float64
}

func (o orderedFloats) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	b.WriteByte('{')
	for i, k := range o.keys {
		if i > 0 {
			b.WriteByte(',')
		}
		kb, _ := json.Marshal(k)
		b.Write(kb)
		b.WriteByte(':')
		b.Write(strconv.AppendFloat(nil, finite(o.vals[i]), 'g', -1, 64))
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

type provImportance struct {
	Method   string        `json:"method"`
	Increase orderedFloats `json:"increase"`
}

type provenance struct {
	Trainer    string          `json:"trainer"`
	Settings   provSettings    `json:"settings"`
	Rows       int             `json:"rows"`
	OOBRows    int             `json:"oob_rows"`
	OOBError   *float64        `json:"oob_error,omitempty"`
	OOBR2      *float64        `json:"oob_r2,omitempty"`
	OOBCurve   provCurve       `json:"oob_curve"`
	OOBShare   float64         `json:"oob_share"`
	Importance *provImportance `json:"importance,omitempty"`
}

func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

func optional(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}

func provenanceJSON(d *Data, rs *resolved, seed uint64, o *OOB) json.RawMessage {
	p := provenance{
		Trainer: "sawmill train",
		Settings: provSettings{
			Task: d.Task, Label: d.Label, Trees: rs.trees, Mtry: rs.mtry, MinLeaf: rs.minLeafInt,
			MaxDepth: rs.maxDepth, MaxBins: rs.maxBins, SampleFraction: rs.fraction, Seed: seed,
		},
		Rows:     d.Len(),
		OOBRows:  o.Rows,
		OOBError: optional(o.Error),
		OOBR2:    optional(o.R2),
		OOBShare: o.Share,
		OOBCurve: provCurve{Trees: []int{}, Error: []float64{}},
	}
	for _, c := range o.Curve {
		if math.IsNaN(c.Error) {
			continue
		}
		p.OOBCurve.Trees = append(p.OOBCurve.Trees, c.Trees)
		p.OOBCurve.Error = append(p.OOBCurve.Error, c.Error)
	}
	if o.Importance != nil {
		p.Importance = &provImportance{Method: ImportanceMethod, Increase: orderedFloats{keys: d.Features, vals: o.Importance}}
	}
	b, err := json.Marshal(p)
	if err != nil {
		panic("BUG: train: provenance: " + err.Error())
	}
	return b
}
