package randmodel

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/forest"
)

// GenOptions bounds the forests RandomForest draws. Zero values mean the
// defaults noted on each field.
type GenOptions struct {
	MaxTrees    int // most trees; default 6
	MaxFeatures int // most features; default 6
	MaxOutputs  int // most outputs (classes); default 12
	MaxDepth    int // deepest ragged or balanced tree; default 8
	MaxChain    int // longest chain (a path of splits each with one leaf child); default 40
	MaxNodes    int // most node slots per tree; default 300
	// PlainNames draws feature names f0, f1, … and class labels c0, c1, …
	// instead of names from the hostile alphabet.
	PlainNames bool
	// NoHuge keeps every number within ±1e30, so that a float target's
	// range is not the only thing tested.
	NoHuge bool
	// Garbage adds unreachable node slots (out-of-range features, child ids
	// that loop) and shuffles node ids, as the format allows.
	Garbage bool
	// V1Only draws no format version 2 construct (by default half the
	// forests use some).
	V1Only bool
}

func (o GenOptions) withDefaults() GenOptions {
	def := func(v *int, d int) {
		if *v <= 0 {
			*v = d
		}
	}
	def(&o.MaxTrees, 6)
	def(&o.MaxFeatures, 6)
	def(&o.MaxOutputs, 12)
	def(&o.MaxDepth, 8)
	def(&o.MaxChain, 40)
	def(&o.MaxNodes, 300)
	return o
}

// hostileNames are feature names and class labels that break naive
// sanitising and quoting: quotes and backslashes, comment markers, keywords
// of Go, C and SQL, leading digits, names that collide once non-identifier
// characters are replaced, non-ASCII, and the empty string (the format
// requires names to be unique, not non-empty), names with leading or
// trailing spaces, and names too long for some engines' identifiers.
// Carriage returns are left out: encoding/csv reads a quoted "\r\n" as "\n".
var hostileNames = []string{
	"a-b", "a_b", "a b", "a.b", "a__b", "_a_b", "a_b_2", "A_B",
	"'", `"`, "`", `\`, `\\`, `a\nb`, "a\nb", "a\tb", `'; DROP TABLE t; --`, `x" OR "1"="1`,
	"/*", "*/", "/* x */", "--", "//", "#", "#include", "??=", "$1", "%s", "%d%n", "{}", "<>",
	"select", "SELECT", "from", "where", "case", "when", "then", "else", "end", "null", "NULL", "order", "group", "table", "row",
	"int", "double", "float", "return", "if", "for", "while", "static", "const", "void", "struct", "default", "auto", "register",
	"func", "package", "import", "var", "type", "go", "chan", "map", "range", "nil", "true", "false", "iota", "len", "math",
	"x", "out", "Predict", "PredictClass", "NumFeatures", "main", "_", "__", "f0", "f1", "c0",
	"0", "1", "9lives", "1e5", "-1", "+", "0x10", "NaN", "inf", "-inf",
	"é", "e\u0301", "Ω", "ñandú", "温度", "🌡", "\u200b", "\u00a0x", "x\u00a0y", "\u202eabc",
	"", "a,b", "a;b", "a\"\"b", "a'b", "id", " a", "a ", "\ta", "a\t", " ",
	"a\x00b", "\x00", "a\u2028b", "\f", "\v", "\x7f", "?", "??", "@x", ":x", "$x", "[x]", "x]", "{x}",
	// 64 bytes each, equal in their first 63: PostgreSQL keeps 63 bytes of
	// an identifier (NAMEDATALEN 64, from memory).
	strings.Repeat("n", 63) + "1", strings.Repeat("n", 63) + "2",
}

// Shapes a tree can take.
const (
	shapeLeaf = iota
	shapeStump
	shapeChain
	shapeRagged
	shapeBalanced
	numShapes
)

// RandomForest draws a valid forest from seed: the same seed and options
// always give the same forest. It panics with BUG if what it drew does not
// validate.
func RandomForest(seed uint64, o GenOptions) *forest.Forest {
	o = o.withDefaults()
	rng := rand.New(rand.NewPCG(seed, 0x5a3d11))
	g := &gen{rng: rng, o: o}
	f := &forest.Forest{InputPrecision: forest.Float64, Transform: forest.NoTransform}
	nf := 1 + rng.IntN(o.MaxFeatures)
	f.Features = g.names(nf, "f")
	if rng.IntN(3) == 0 {
		f.Task = forest.Regression
		f.Combine = pick(rng, forest.Sum, forest.Average)
		switch rng.IntN(10) {
		case 0:
			f.Transform = forest.Logistic
		case 1:
			f.Transform = forest.Softmax
		}
	} else {
		f.Task = forest.Classification
		nc := 2 + rng.IntN(max(1, o.MaxOutputs-1))
		if rng.IntN(3) == 0 {
			nc = 2
		}
		f.Classes = g.names(nc, "c")
		f.Combine = pick(rng, forest.Sum, forest.Average, forest.Vote)
		switch rng.IntN(3) {
		case 1:
			f.Transform = forest.Softmax
		case 2:
			if nc == 2 {
				f.Transform = forest.Logistic
			}
		}
	}
	if rng.IntN(2) == 0 {
		f.InputPrecision = forest.Float32
	}
	k := f.NumOutputs()
	f.BaseScore = make([]float64, k)
	if rng.IntN(2) == 0 {
		for j := range f.BaseScore {
			f.BaseScore[j] = g.value()
		}
	}
	g.pool = g.thresholdPool()
	nt := 1 + rng.IntN(o.MaxTrees)
	for range nt {
		f.Trees = append(f.Trees, g.tree(nf, k))
	}
	if !o.V1Only && rng.IntN(2) == 0 {
		g.version2(f)
	}
	if rng.IntN(4) == 0 {
		f.Provenance = []byte(`{"generator":"randmodel.RandomForest","seed":` + strconv.FormatUint(seed, 10) + `}`)
	}
	if err := f.Validate(fmt.Sprintf("random forest %d", seed)); err != nil {
		panic("BUG: randmodel.RandomForest drew an invalid forest: " + err.Error())
	}
	return f
}

func pick[T any](rng *rand.Rand, v ...T) T { return v[rng.IntN(len(v))] }

// version2 gives f format 2 constructs, each with some chance: more
// outputs for a regression model, trees of one output (the shape of
// per-class boosting), set splits with random category lists (small,
// around float32's integer limit 2^24, at the top of [0, 2^31), empty,
// long), zero_missing splits, a category rule, a missing value (0, −999 or
// a threshold), float32 accumulation, every transform and a scale.
func (g *gen) version2(f *forest.Forest) {
	rng := g.rng
	if f.Task == forest.Regression && f.Transform != forest.Logistic && rng.IntN(2) == 0 {
		k := 2 + rng.IntN(3)
		f.Outputs = k
		f.BaseScore = make([]float64, k)
		for j := range f.BaseScore {
			f.BaseScore[j] = g.value()
		}
		for ti := range f.Trees {
			t := &f.Trees[ti]
			old := t.Value
			t.Value = make([]float64, 0, len(old)*k)
			for _, v := range old {
				t.Value = append(t.Value, v)
				for j := 1; j < k; j++ {
					t.Value = append(t.Value, g.value())
				}
			}
		}
	}
	k := f.NumOutputs()
	if f.Combine != forest.Vote && k > 1 && rng.IntN(2) == 0 {
		for ti := range f.Trees {
			if rng.IntN(4) == 0 {
				continue
			}
			t := &f.Trees[ti]
			o := (ti + rng.IntN(2)) % k
			v := make([]float64, t.NumNodes())
			for i := range v {
				v[i] = t.Value[i*k+o]
			}
			t.HasOutput, t.Output, t.Value = true, o, v
		}
		if f.Combine == forest.Average { // every output needs a tree to average
			for j := 0; j < k; j++ {
				f.Trees = append(f.Trees, forest.Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1},
					Right: []int{-1}, MissingLeft: []bool{false}, Value: []float64{g.value()}, HasOutput: true, Output: j})
			}
		}
	}
	cats, zeros := rng.IntN(2) == 0, rng.IntN(3) == 0
	for ti := range f.Trees {
		t := &f.Trees[ti]
		for i, l := range t.Left {
			if l == -1 || t.Feature[i] < 0 || t.Feature[i] >= len(f.Features) {
				continue
			}
			if cats && rng.IntN(2) == 0 {
				if t.Categories == nil {
					t.Categories = make([][]int32, t.NumNodes())
				}
				t.Categories[i] = g.categories()
				t.Threshold[i] = 0
			}
			if zeros && rng.IntN(3) == 0 {
				if t.ZeroMissing == nil {
					t.ZeroMissing = make([]bool, t.NumNodes())
				}
				t.ZeroMissing[i] = true
			}
		}
	}
	f.CategoryMatch = pick(rng, "", forest.MatchFloor, forest.MatchTruncate, forest.MatchExact)
	if rng.IntN(3) == 0 {
		f.HasMissingValue = true
		f.MissingValue = pick(rng, 0, -999, 1, pick(rng, g.pool...))
	}
	if rng.IntN(2) == 0 {
		f.Accumulate = forest.Float32
		for ti := range f.Trees {
			t := &f.Trees[ti]
			for i, v := range t.Value {
				if r := forest.Round32(v); !math.IsInf(r, 0) {
					t.Value[i] = r
				} else {
					t.Value[i] = math.Copysign(math.MaxFloat32, v)
				}
			}
		}
		if rng.IntN(2) == 0 {
			for j, b := range f.BaseScore {
				f.BaseScore[j] = forest.Round32(b)
				if math.IsInf(f.BaseScore[j], 0) {
					f.BaseScore[j] = 1
				}
			}
		}
	}
	if f.Transform != forest.Logistic && (f.Task == forest.Regression || rng.IntN(2) == 0) {
		trs := []forest.Transform{forest.NoTransform, forest.Exp, forest.LogisticEach, forest.Normalize, forest.Softmax}
		if k == 1 && f.Task == forest.Regression {
			trs = append(trs, forest.Logistic)
		}
		f.Transform = pick(rng, trs...)
	}
	if rng.IntN(3) == 0 {
		f.TransformScale = pick(rng, 0.5, -1.5, 1e-3, 3, 1.0000001, 1e-50, 1e50, -1)
	}
}

// categories draws a sorted list of distinct categories.
func (g *gen) categories() []int32 {
	rng := g.rng
	var c []int32
	switch rng.IntN(8) {
	case 0:
		return []int32{}
	case 1:
		c = []int32{1 << 24, 1<<24 + 1, 1<<24 + 3}
	case 2:
		c = []int32{0, 1<<31 - 2, 1<<31 - 1}
	case 3: // long and dense
		for i := 0; i < 200+rng.IntN(2000); i++ {
			c = append(c, int32(rng.IntN(3000)))
		}
	case 4: // long and sparse
		for i := 0; i < 100+rng.IntN(500); i++ {
			c = append(c, int32(rng.IntN(1<<31)))
		}
	}
	for i := 0; i < 1+rng.IntN(5); i++ {
		c = append(c, int32(rng.IntN(10)))
	}
	slices.Sort(c)
	return slices.Compact(c)
}

type gen struct {
	rng  *rand.Rand
	o    GenOptions
	pool []float64 // thresholds of this forest, so trees share and repeat them
}

// names draws n unique names, from the hostile alphabet unless PlainNames.
func (g *gen) names(n int, plain string) []string {
	out := make([]string, 0, n)
	seen := map[string]bool{}
	for len(out) < n {
		var s string
		switch {
		case g.o.PlainNames:
			s = fmt.Sprintf("%s%d", plain, len(out))
		case g.rng.IntN(5) == 0:
			s = pick(g.rng, hostileNames...) + pick(g.rng, hostileNames...)
		case g.rng.IntN(6) == 0:
			s = fmt.Sprintf("%s%d", plain, g.rng.IntN(20))
		default:
			s = pick(g.rng, hostileNames...)
		}
		if seen[s] || plain == "c" && strings.ContainsRune(s, 0) {
			// A class label becomes a string literal in SQL, and no engine
			// takes a NUL byte in one (the SQL emitter refuses such a model
			// with ErrNames, tested in sql_test.go); feature and output names
			// with NUL are mapped to table columns by the runner instead.
			continue
		}
		seen[s] = true
		out = append(out, s)
	}
	return out
}

// special are numbers at the edges of float64 and float32.
var special = []float64{
	0, math.Copysign(0, -1), 1, -1, 0.5, 0.1, -0.1, 1.5, 2.5, 3,
	5e-324, -5e-324, 1e-310, -1e-310, 0x1p-1022, -0x1p-1022, 0x1p-1022 - 5e-324,
	math.SmallestNonzeroFloat32, -math.SmallestNonzeroFloat32, math.SmallestNonzeroFloat32 / 2,
	math.SmallestNonzeroFloat32 * 1.5, 0x1p-126, 0x1p-149 * 3,
	math.MaxFloat32, -math.MaxFloat32, 3.4028235677973366e38, -3.4028235677973366e38, 0x1p128, 1e38, 1e39,
	16777216, 16777217, -16777217, 0x1p53, 0x1p53 + 2, 1 + 0x1p-52, 1 - 0x1p-53, 1 + 0x1p-24, 1 + 0x1p-23,
	1e300, -1e300, 1e-300, -1e-300, 1e30, -1e30,
}

// huge reports whether |v| is beyond the NoHuge bound.
func huge(v float64) bool { return math.Abs(v) > 1e30 }

func (g *gen) thresholdPool() []float64 {
	var pool []float64
	for range 3 + g.rng.IntN(8) {
		var v float64
		switch g.rng.IntN(6) {
		case 0, 1:
			v = pick(g.rng, special...)
		case 2:
			v = math.Round(g.rng.NormFloat64()*8) / 4 // dyadic: float32-representable
		case 3:
			v = g.rng.NormFloat64() * math.Pow(10, float64(g.rng.IntN(13)-6))
		case 4:
			v = float64(float32(g.rng.NormFloat64() * 100))
		default:
			v = math.Round(g.rng.NormFloat64()*1000) / 10 // decimal: rarely float32
		}
		if g.o.NoHuge && huge(v) {
			v = 0.1
		}
		pool = append(pool, v)
		// Adjacent thresholds: the float64 and float32 neighbours.
		switch g.rng.IntN(4) {
		case 0:
			pool = append(pool, math.Nextafter(v, math.Inf(1)), math.Nextafter(v, math.Inf(-1)))
		case 1:
			if n := float64(math.Nextafter32(float32(v), float32(math.Inf(1)))); !math.IsInf(n, 0) {
				pool = append(pool, n)
			}
			if n := float64(float32(v)); !math.IsInf(n, 0) {
				pool = append(pool, n)
			}
		}
	}
	return pool
}

// value draws a leaf value or base score entry. Magnitudes stay at or below
// 1e300, so the sum of a few trees is finite.
func (g *gen) value() float64 {
	switch g.rng.IntN(12) {
	case 0:
		return pick(g.rng, 0, math.Copysign(0, -1))
	case 1:
		v := pick(g.rng, special...)
		if g.o.NoHuge && huge(v) {
			return 1
		}
		return v
	case 2:
		return g.rng.NormFloat64() * math.Pow(10, float64(g.rng.IntN(9)-4))
	case 3, 4:
		return g.rng.Float64()
	default:
		return float64(g.rng.IntN(9)-2) / 4
	}
}

// tree draws one tree of a random shape.
func (g *gen) tree(nf, k int) forest.Tree {
	b := &treeBuilder{k: k}
	leaf := func() int {
		v := make([]float64, k)
		for j := range v {
			v[j] = g.value()
		}
		if g.rng.IntN(4) == 0 && k > 1 { // ties for vote's argmax
			for j := range v {
				v[j] = v[0]
			}
		}
		return b.add(-1, 0, false, v)
	}
	split := func() int {
		return b.add(g.rng.IntN(nf), pick(g.rng, g.pool...), g.rng.IntN(2) == 0, nil)
	}
	shape := g.rng.IntN(numShapes)
	switch shape {
	case shapeLeaf:
		leaf()
	case shapeStump:
		r := split()
		b.link(r, leaf(), leaf())
	case shapeChain:
		n := 1 + g.rng.IntN(g.o.MaxChain)
		cur := split()
		for i := 0; i < n; i++ {
			next := leaf()
			if i < n-1 {
				next = split()
			}
			other := leaf()
			if g.rng.IntN(2) == 0 {
				b.link(cur, next, other)
			} else {
				b.link(cur, other, next)
			}
			cur = next
		}
	default:
		p := 0.7
		if shape == shapeBalanced {
			p = 1
		}
		maxDepth := 1 + g.rng.IntN(g.o.MaxDepth)
		if shape == shapeBalanced {
			maxDepth = min(maxDepth, 6)
		}
		type item struct{ node, depth int }
		root := split()
		stack := []item{{root, 0}}
		for len(stack) > 0 {
			it := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			var kids [2]int
			for c := range kids {
				d := it.depth + 1
				if d < maxDepth && len(b.left) < g.o.MaxNodes-2 && g.rng.Float64() < p {
					kids[c] = split()
					stack = append(stack, item{kids[c], d})
				} else {
					kids[c] = leaf()
				}
			}
			b.link(it.node, kids[0], kids[1])
		}
	}
	t := b.tree()
	if g.o.Garbage && g.rng.IntN(3) == 0 {
		t = g.garbage(t, nf)
	}
	return t
}

// garbage shuffles node ids (root stays 0) and appends unreachable slots
// whose fields are nonsense the format allows where nothing reads them.
func (g *gen) garbage(t forest.Tree, nf int) forest.Tree {
	n := t.NumNodes()
	k := len(t.Value) / n
	perm := make([]int, n) // old id -> new id
	for i := range perm {
		perm[i] = i
	}
	g.rng.Shuffle(n-1, func(i, j int) { perm[i+1], perm[j+1] = perm[j+1], perm[i+1] })
	extra := 1 + g.rng.IntN(4)
	m := n + extra
	out := forest.Tree{
		Feature: make([]int, m), Threshold: make([]float64, m), Left: make([]int, m), Right: make([]int, m),
		MissingLeft: make([]bool, m), Value: make([]float64, m*k),
	}
	mapID := func(c int) int {
		if c < 0 {
			return c
		}
		return perm[c]
	}
	for i := 0; i < n; i++ {
		j := perm[i]
		out.Feature[j], out.Threshold[j], out.MissingLeft[j] = t.Feature[i], t.Threshold[i], t.MissingLeft[i]
		out.Left[j], out.Right[j] = mapID(t.Left[i]), mapID(t.Right[i])
		copy(out.Value[j*k:(j+1)*k], t.Value[i*k:(i+1)*k])
	}
	for j := n; j < m; j++ {
		out.Feature[j] = pick(g.rng, -1, nf, 1000, g.rng.IntN(nf))
		out.Threshold[j] = pick(g.rng, 0, 1e300, -7.5)
		out.Left[j] = pick(g.rng, -1, j, 0, m-1)
		out.Right[j] = pick(g.rng, -1, j, 0, 1)
		for c := range k {
			out.Value[j*k+c] = 1e300
		}
	}
	return out
}

type treeBuilder struct {
	k                   int
	feature, left, righ []int
	threshold           []float64
	missingLeft         []bool
	value               []float64
}

func (b *treeBuilder) add(feature int, threshold float64, ml bool, v []float64) int {
	b.feature = append(b.feature, feature)
	b.threshold = append(b.threshold, threshold)
	b.left = append(b.left, -1)
	b.righ = append(b.righ, -1)
	b.missingLeft = append(b.missingLeft, ml)
	if v == nil {
		v = make([]float64, b.k)
	}
	b.value = append(b.value, v...)
	return len(b.left) - 1
}

func (b *treeBuilder) link(parent, l, r int) { b.left[parent], b.righ[parent] = l, r }

func (b *treeBuilder) tree() forest.Tree {
	return forest.Tree{Feature: b.feature, Threshold: b.threshold, Left: b.left, Right: b.righ,
		MissingLeft: b.missingLeft, Value: b.value}
}

// RandomRows draws n rows for f from seed: values on the model's thresholds,
// their float64 and float32 neighbours, the midpoints where float32 rounding
// turns, missing values (NaN), ±Inf, ±0, subnormals and huge magnitudes.
func RandomRows(seed uint64, f *forest.Forest, n int) *forest.Rows {
	rng := rand.New(rand.NewPCG(seed, 0x7e11a))
	nf := len(f.Features)
	byFeature := make([][]float64, nf)
	var all []float64
	for ti := range f.Trees {
		t := &f.Trees[ti]
		for i, l := range t.Left {
			if l != -1 && t.Feature[i] >= 0 && t.Feature[i] < nf {
				byFeature[t.Feature[i]] = append(byFeature[t.Feature[i]], t.Threshold[i])
				all = append(all, t.Threshold[i])
			}
		}
	}
	all = append(all, 0)
	// Version 2's edges: categories, the zero band and the missing value.
	for ti := range f.Trees {
		t := &f.Trees[ti]
		for i, cs := range t.Categories {
			if cs == nil || t.Feature[i] < 0 || t.Feature[i] >= nf {
				continue
			}
			for _, c := range cs[:min(len(cs), 6)] {
				v := float64(c)
				byFeature[t.Feature[i]] = append(byFeature[t.Feature[i]], v, v+1, v-0.5, v+0.5, -v)
			}
		}
		for i, z := range t.ZeroMissing {
			if z && t.Feature[i] >= 0 && t.Feature[i] < nf {
				byFeature[t.Feature[i]] = append(byFeature[t.Feature[i]], forest.ZeroMissingBound, -forest.ZeroMissingBound)
			}
		}
	}
	if f.HasMissingValue {
		all = append(all, f.MissingValue, f.MissingValue)
	}
	rows := &forest.Rows{Features: f.Features, Values: make([]float64, 0, n*nf), Line: make([]int, n)}
	for r := 0; r < n; r++ {
		rows.Line[r] = r + 2
		for j := 0; j < nf; j++ {
			ts := byFeature[j]
			if len(ts) == 0 || rng.IntN(5) == 0 {
				ts = all
			}
			rows.Values = append(rows.Values, adversarial(rng, pick(rng, ts...)))
		}
	}
	return rows
}

// adversarial draws a value near threshold t, or a special value.
func adversarial(rng *rand.Rand, t float64) float64 {
	up := math.Inf(1 - 2*rng.IntN(2))
	switch rng.IntN(14) {
	case 0:
		return math.NaN()
	case 1:
		return up
	case 2:
		return math.Nextafter(t, up)
	case 3:
		return float64(math.Nextafter32(float32(t), float32(up)))
	case 4:
		return float64(float32(t))
	case 5:
		// The float32 rounding boundary above or below t, and its neighbours.
		lo := float64(floor32(t))
		hi := float64(math.Nextafter32(floor32(t), float32(math.Inf(1))))
		if math.IsInf(lo, 0) || math.IsInf(hi, 0) {
			return t
		}
		m := lo/2 + hi/2
		return pick(rng, m, math.Nextafter(m, up))
	case 6:
		return pick(rng, special...)
	case 7:
		return rng.NormFloat64() * math.Pow(10, float64(rng.IntN(21)-10))
	case 8:
		return pick(rng, 0, math.Copysign(0, -1))
	default:
		return t
	}
}

func floor32(t float64) float32 {
	f := float32(t)
	if float64(f) > t {
		f = math.Nextafter32(f, float32(math.Inf(-1)))
	}
	return f
}

// EncodeRows writes rows as CSV that ReadRows reads back bit for bit: a
// first column numbering the rows (named so as not to clash with a
// feature), then the features in model order; every number in its
// shortest round-trip form, NaN as an empty cell, infinities as inf and -inf.
func EncodeRows(rows *forest.Rows) []byte {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	idName := "row"
	for slices.Contains(rows.Features, idName) {
		idName += "_"
	}
	w.Write(append([]string{idName}, rows.Features...))
	rec := make([]string, 1+len(rows.Features))
	for i := 0; i < rows.Len(); i++ {
		rec[0] = strconv.Itoa(i)
		for j, v := range rows.Row(i) {
			rec[1+j] = formatCell(v)
		}
		w.Write(rec)
	}
	w.Flush()
	return buf.Bytes()
}

func formatCell(v float64) string {
	switch {
	case math.IsNaN(v):
		return ""
	case math.IsInf(v, 1):
		return "inf"
	case math.IsInf(v, -1):
		return "-inf"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// WriteCase writes f and rows as a golden case folder: model.json and
// rows.csv, each atomically.
func WriteCase(dir string, f *forest.Forest, rows *forest.Rows) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	if err := forest.WriteFile(filepath.Join(dir, "model.json"), f); err != nil {
		return err
	}
	return forest.WriteFileAtomic(filepath.Join(dir, "rows.csv"), EncodeRows(rows), 0o644)
}

// CheckRowsRoundTrip makes sure that a case written from rows reads back bit
// for bit, so a kept failing case fails the same way.
func CheckRowsRoundTrip(f *forest.Forest, rows *forest.Rows) error {
	back, err := forest.ReadRows(bytes.NewReader(EncodeRows(rows)), "rows.csv", f.Features, forest.RowOptions{})
	if err != nil {
		return fmt.Errorf("rows do not read back: %v", err)
	}
	if back.Len() != rows.Len() {
		return fmt.Errorf("rows read back: %d rows, wrote %d", back.Len(), rows.Len())
	}
	for i, v := range rows.Values {
		if math.Float64bits(v) != math.Float64bits(back.Values[i]) && !(math.IsNaN(v) && math.IsNaN(back.Values[i])) {
			return fmt.Errorf("rows read back: value %d is %v, wrote %v", i, back.Values[i], v)
		}
	}
	return nil
}

// Small keeps the differential test's models small: building emitted code
// per model is the cost, and small models reach the same corners.
var Small = GenOptions{MaxTrees: 5, MaxFeatures: 5, MaxDepth: 7, MaxChain: 24, MaxNodes: 120, Garbage: true}

// EnvInt is the non-negative integer in the environment variable name
// (SAWMILL_DIFF_MODELS, SAWMILL_DIFF_SEED, ...), def when it is unset; t
// fails on anything else.
func EnvInt(t testing.TB, name string, def uint64) uint64 {
	s := os.Getenv(name)
	if s == "" {
		return def
	}
	v, err := strconv.ParseUint(s, 10, 64)
	if err != nil {
		t.Fatalf("%s=%q: want a non-negative integer", name, s)
	}
	return v
}
