package forest

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// The rules of "Format version 2" in docs/forest-format.md, one table per
// rule.

const v2head = `"sawmill_forest":2,"task":"regression","features":["a","b"],`

// stump2 is a one-split tree on feature 0 with leaves l and r, as JSON.
func stump2(extra string, l, r string) string {
	return `{` + extra + `"feature":[0,-1,-1],"threshold":[0,0,0],"left":[1,-1,-1],"right":[2,-1,-1],"value":[[0],` + l + `,` + r + `]}`
}

// Every rejection "Meaning in version 2" adds, and the version 2 keys'
// own, each naming its place.
func TestV2Rejections(t *testing.T) {
	cases := []struct{ doc, want string }{
		{`{` + v2head + `"trees":[` + stump2(`"categories":[[3,1],null,null],`, "[1]", "[2]") + `]}`, "m.json: tree 0, node 0: categories are not sorted (1 after 3)"},
		{`{` + v2head + `"trees":[` + stump2(`"categories":[[1,1],null,null],`, "[1]", "[2]") + `]}`, "m.json: tree 0, node 0: categories lists 1 twice"},
		{`{` + v2head + `"trees":[` + stump2(`"categories":[[-1],null,null],`, "[1]", "[2]") + `]}`, "m.json: tree 0, node 0: categories holds -1, not an integer in [0, 2^31)"},
		{`{` + v2head + `"trees":[` + stump2(`"categories":[[2147483648],null,null],`, "[1]", "[2]") + `]}`, "m.json: tree 0, node 0: categories holds 2.147483648e+09, not an integer in [0, 2^31)"},
		{`{` + v2head + `"trees":[` + stump2(`"categories":[[2.5],null,null],`, "[1]", "[2]") + `]}`, "m.json: tree 0, node 0: categories holds 2.5, not an integer"},
		{`{` + v2head + `"trees":[` + stump2(`"categories":[null,null],`, "[1]", "[2]") + `]}`, `m.json: tree 0: "categories" has 2 entries but "left" has 3`},
		{`{` + v2head + `"trees":[` + stump2(`"zero_missing":[true],`, "[1]", "[2]") + `]}`, `m.json: tree 0: "zero_missing" has 1 entries but "left" has 3`},
		{`{` + v2head + `"outputs":2,"trees":[` + stump2(`"output":2,`, "[1]", "[2]") + `]}`, "m.json: tree 0: output 2 is out of range (the model has outputs 0 to 1)"},
		{`{` + v2head + `"outputs":2,"trees":[` + stump2(`"output":-1,`, "[1]", "[2]") + `]}`, "m.json: tree 0: output -1 is out of range"},
		{`{` + v2head + `"outputs":2,"combine":"sum","trees":[` + stump2(`"output":1,`, "[1,2]", "[2]") + `]}`, `m.json: tree 0, node 1: value has 2 entries, a tree with "output" has 1`},
		{`{` + v2head + `"accumulate":"float32","trees":[` + stump2(``, "[0.1]", "[2]") + `]}`, "m.json: tree 0, node 1: value[0] is 0.1, which float32 cannot hold"},
		{`{` + v2head + `"transform_scale":0,"trees":[` + stump2(``, "[1]", "[2]") + `]}`, "m.json: transform_scale is 0: it must be a finite non-zero number"},
		{`{"sawmill_forest":2,"task":"classification","classes":["x","y"],"features":["a"],"combine":"vote","trees":[` + stump2(`"output":1,`, "[1]", "[2]") + `]}`, `m.json: tree 0: a tree with "output" cannot be combined by vote`},
		{`{` + v2head + `"outputs":2,"output_transform":"logistic","trees":[` + stump2(``, "[1,1]", "[2,2]") + `]}`, `m.json: output_transform "logistic" needs one output, the model has 2`},
		{`{` + v2head + `"accumulate":"float16","trees":[` + stump2(``, "[1]", "[2]") + `]}`, `m.json: unknown accumulate "float16"`},
		{`{` + v2head + `"category_match":"round","trees":[` + stump2(``, "[1]", "[2]") + `]}`, `m.json: unknown category_match "round"`},
		{`{` + v2head + `"output_transform":"tanh","trees":[` + stump2(``, "[1]", "[2]") + `]}`, `m.json: unknown output_transform "tanh"`},
		{`{"sawmill_forest":2,"task":"classification","classes":["x","y"],"features":["a"],"outputs":2,"trees":[` + stump2(``, "[1,0]", "[0,1]") + `]}`, `m.json: "outputs" is for regression models only`},
		{`{` + v2head + `"outputs":0,"trees":[` + stump2(``, "[1]", "[2]") + `]}`, "m.json: outputs is 0: a model has at least one output"},
		{`{` + v2head + `"outputs":2,"trees":[` + stump2(`"output":0,`, "[1]", "[2]") + `]}`, "m.json: output 1 has no trees to average"},
		{`{"sawmill_forest":1,"task":"regression","features":["a"],"accumulate":"float32","trees":[` + stump2(``, "[1]", "[2]") + `]}`, `m.json: "accumulate" needs "sawmill_forest": 2`},
		{`{"sawmill_forest":1,"task":"regression","features":["a"],"output_transform":"exp","trees":[` + stump2(``, "[1]", "[2]") + `]}`, `m.json: output_transform "exp" needs "sawmill_forest": 2`},
		{`{"sawmill_forest":1,"task":"regression","features":["a"],"trees":[` + stump2(`"zero_missing":[true,false,false],`, "[1]", "[2]") + `]}`, `m.json: tree 0: "zero_missing" needs "sawmill_forest": 2`},
		{`{"sawmill_forest":3,"task":"regression","features":["a"],"new_key":1,"trees":[]}`, "m.json: sawmill_forest version 3 is not supported (this reader knows versions 1 to 2)"},
	}
	for _, c := range cases {
		_, err := mustDecode(t, c.doc)
		if assert.Error(t, err, c.doc) {
			assert.Contains(t, err.Error(), c.want, c.doc)
			assert.True(t, strings.HasPrefix(err.Error(), "m.json: "), err.Error())
		}
	}
}

// Rules a JSON file cannot break but a Forest built by hand can.
func TestV2ValidateByHand(t *testing.T) {
	base := func() *Forest {
		return &Forest{Task: Regression, Features: []string{"a"}, InputPrecision: Float64, Combine: Sum,
			Transform: NoTransform, BaseScore: []float64{0}, Trees: []Tree{{Feature: []int{0, -1, -1},
				Threshold: []float64{0, 0, 0}, Left: []int{1, -1, -1}, Right: []int{2, -1, -1},
				MissingLeft: make([]bool, 3), Value: []float64{0, 1, 2}}}}
	}
	require.NoError(t, base().Validate("h"), "zero values of the version 2 fields are their defaults")
	for _, c := range []struct {
		edit func(*Forest)
		want string
	}{
		{func(f *Forest) { f.TransformScale = math.Inf(1) }, "h: transform_scale is +Inf: it must be a finite non-zero number"},
		{func(f *Forest) { f.TransformScale = math.NaN() }, "h: transform_scale is NaN"},
		{func(f *Forest) { f.HasMissingValue, f.MissingValue = true, math.NaN() }, "h: missing_value is NaN"},
		{func(f *Forest) { f.Trees[0].Categories = [][]int32{{-5}, nil, nil} }, "h: tree 0, node 0: categories holds -5, outside [0, 2^31)"},
		{func(f *Forest) { f.Trees[0].Categories = [][]int32{{4, 2}, nil, nil} }, "h: tree 0, node 0: categories are not sorted (2 after 4)"},
		{func(f *Forest) { f.Trees[0].ZeroMissing = []bool{true} }, "h: tree 0: arrays of unequal length"},
		{func(f *Forest) { f.Outputs = -1 }, "h: outputs is -1"},
	} {
		f := base()
		c.edit(f)
		err := f.Validate("h")
		if assert.Error(t, err, c.want) {
			assert.Contains(t, err.Error(), c.want)
		}
	}
}

// An unknown key is refused with the nearest known key as a hint, at the
// top level and in a tree; provenance stays free-form.
func TestUnknownKeys(t *testing.T) {
	_, err := mustDecode(t, `{"sawmill_forest":1,"task":"regression","features":["a"],"input_precison":"float32","trees":[`+stump2(``, "[1]", "[2]")+`]}`)
	require.Error(t, err)
	assert.Equal(t, "m.json: unknown key \"input_precison\"\nhint: did you mean \"input_precision\"?", err.Error())
	_, err = mustDecode(t, `{"sawmill_forest":2,"task":"regression","features":["a"],"trees":[`+stump2(``, "[1]", "[2]")+`,`+stump2(`"zero_mising":[false,false,false],`, "[1]", "[2]")+`]}`)
	require.Error(t, err)
	assert.Equal(t, "m.json: tree 1: unknown key \"zero_mising\"\nhint: did you mean \"zero_missing\"?", err.Error())
	_, err = mustDecode(t, `{"sawmill_forest":1,"task":"regression","features":["a"],"xyzzy_plugh_frobnicate":1,"trees":[`+stump2(``, "[1]", "[2]")+`]}`)
	require.Error(t, err)
	assert.Contains(t, err.Error(), "m.json: unknown key \"xyzzy_plugh_frobnicate\"\nhint: the keys are sawmill_forest, task,")
	f, err := mustDecode(t, `{"sawmill_forest":1,"task":"regression","features":["a"],"trees":[`+stump2(``, "[1]", "[2]")+`],"provenance":{"anything":{"goes":[1,"x"]}}}`)
	require.NoError(t, err)
	assert.JSONEq(t, `{"anything":{"goes":[1,"x"]}}`, string(f.Provenance))
	_, err = mustDecode(t, `{"sawmill_forest":1,"task":"regression","features":["a"],"trees":[`+stump2(``, "[1]", "[2]")+`]} {}`)
	require.Error(t, err)
	assert.Contains(t, err.Error(), "m.json: line 1, column")
	_, err = mustDecode(t, `{"snapshot":true}`)
	assert.EqualError(t, err, `m.json: missing "sawmill_forest": not a sawmill forest file`)
	// Keys are found past strings holding quotes, brackets and commas, and
	// compared after unescaping.
	_, err = mustDecode(t, `{"sawmill_forest":1,"\u0074ask":"regression","features":["a\"}],{[\\"],"provenance":{"x":"}"},`+
		"\n"+` "trees":[`+stump2(``, "[1]", "[2]")+`], "comb\"ine" : "sum"}`)
	require.Error(t, err)
	assert.Equal(t, `m.json: unknown key "comb\"ine"`+"\nhint: did you mean \"combine\"?", err.Error())
}

// route builds a one-split model on feature 0 and reports whether x goes
// left; the left leaf is 1, the right leaf 2.
func route(t *testing.T, f *Forest, x float64) bool {
	t.Helper()
	require.NoError(t, f.Validate("r"))
	out := []float64{0}
	f.Predict([]float64{x}, out)
	return out[0] == 1
}

func setSplit(match CategoryMatch, prec Precision, cats ...int32) *Forest {
	return &Forest{Task: Regression, Features: []string{"c"}, InputPrecision: prec, Combine: Sum,
		Transform: NoTransform, BaseScore: []float64{0}, CategoryMatch: match,
		Trees: []Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{0, 0, 0}, Left: []int{1, -1, -1},
			Right: []int{2, -1, -1}, MissingLeft: []bool{true, false, false}, Value: []float64{0, 1, 2},
			Categories: [][]int32{cats, nil, nil}}}}
}

// Set splits: "Meaning in version 2", step 3, under each category_match.
func TestV2SetSplitRouting(t *testing.T) {
	const big = 2147483647 // 2^31 − 1, the largest category
	inf := math.Inf(1)
	nan := math.NaN()
	negZero := math.Copysign(0, -1)
	cases := []struct {
		x                      float64
		floor, trunc, exact    bool
		floor32, trunc32, ex32 bool // with input_precision float32
	}{
		{0, true, true, true, true, true, true},
		{negZero, true, true, true, true, true, true},         // −0 counts as category 0
		{0.5, true, true, false, true, true, false},           // floor and truncate: 0; exact: no
		{-0.5, false, true, false, false, true, false},        // negative: floor never; truncate toward zero gives 0
		{-0.999999, false, true, false, false, true, false},   // still above −1
		{-1, false, false, false, false, false, false},        // truncates to −1: never a member
		{3, true, true, true, true, true, true},               // listed
		{3.75, true, true, false, true, true, false},          // ⌊3.75⌋ = 3
		{2, false, false, false, false, false, false},         // not listed
		{2.9999999999, false, false, false, true, true, true}, // float32 rounds it to 3
		{big, true, true, true, false, false, false},          // float32 rounds 2^31 − 1 up to 2^31
		{big + 0.5, true, true, false, false, false, false},   // below 2^31: ⌊v⌋ = 2^31 − 1
		{1 << 31, false, false, false, false, false, false},   // 2^31: outside
		{inf, false, false, false, false, false, false},
		{-inf, false, false, false, false, false, false},
		{nan, true, true, true, true, true, true}, // missing: missing_left is true
		{1e300, false, false, false, false, false, false},
	}
	for _, c := range cases {
		for _, m := range []struct {
			match CategoryMatch
			prec  Precision
			want  bool
		}{
			{MatchFloor, Float64, c.floor}, {"", Float64, c.floor}, {MatchTruncate, Float64, c.trunc}, {MatchExact, Float64, c.exact},
			{MatchFloor, Float32, c.floor32}, {MatchTruncate, Float32, c.trunc32}, {MatchExact, Float32, c.ex32},
		} {
			f := setSplit(m.match, m.prec, 0, 3, big)
			assert.Equal(t, m.want, route(t, f, c.x), "x=%v category_match=%q input_precision=%s", c.x, m.match, m.prec)
		}
	}
	// An empty list sends every value right; the threshold is ignored.
	f := setSplit(MatchFloor, Float64, []int32{}...)
	require.NotNil(t, f.Trees[0].Categories[0])
	f.Trees[0].Threshold[0] = 100
	assert.False(t, route(t, f, 0))
	assert.False(t, route(t, f, 5))
}

// Missing values: NaN, missing_value after input rounding, and zero_missing
// with its bound, at numeric and set splits.
func TestV2MissingRouting(t *testing.T) {
	numeric := func(prec Precision) *Forest {
		return &Forest{Task: Regression, Features: []string{"x"}, InputPrecision: prec, Combine: Sum,
			Transform: NoTransform, BaseScore: []float64{0},
			Trees: []Tree{{Feature: []int{0, -1, -1}, Threshold: []float64{-1, 0, 0}, Left: []int{1, -1, -1},
				Right: []int{2, -1, -1}, MissingLeft: []bool{true, false, false}, Value: []float64{0, 1, 2}}}}
	}
	// Threshold −1: every value tried below goes right unless missing.
	zm := func(prec Precision) *Forest {
		f := numeric(prec)
		f.Trees[0].ZeroMissing = []bool{true, false, false}
		return f
	}
	assert.Equal(t, float64(float32(1e-35)), ZeroMissingBound, "the bound is the float32 nearest 1e-35")
	for _, c := range []struct {
		x        float64
		f64, f32 bool // missing with input_precision float64 / float32
	}{
		{0, true, true},
		{math.Copysign(0, -1), true, true},
		{ZeroMissingBound, true, true},
		{-ZeroMissingBound, true, true},
		{math.Nextafter(ZeroMissingBound, 1), false, true}, // float32 rounds it back to the bound
		{1.0000001e-35, false, false},                      // the next float32 above the bound
		{5e-324, true, true},                               // the least subnormal
		{1e-30, false, false},
		{math.NaN(), true, true},
		{math.Inf(1), false, false},
	} {
		assert.Equal(t, c.f64, route(t, zm(Float64), c.x), "zero_missing float64 x=%v", c.x)
		assert.Equal(t, c.f32, route(t, zm(Float32), c.x), "zero_missing float32 x=%v", c.x)
	}
	assert.Equal(t, float32(1.0000001e-35), math.Nextafter32(float32(1e-35), 1), "the table's next float32")

	mv := func(prec Precision, v float64) *Forest {
		f := numeric(prec)
		f.HasMissingValue, f.MissingValue = true, v
		return f
	}
	assert.True(t, route(t, mv(Float64, 999), 999))
	assert.False(t, route(t, mv(Float64, 999), 998.9999999))
	assert.True(t, route(t, mv(Float64, 0), math.Copysign(0, -1)), "−0 equals a missing_value of 0")
	// After input rounding: 0.1 rounds to a float32 that is not 0.1, so a
	// missing_value of 0.1 never matches a float32 model's input, and one
	// of float32(0.1) matches 0.1 and everything that rounds to it.
	assert.False(t, route(t, mv(Float32, 0.1), 0.1))
	assert.True(t, route(t, mv(Float32, float64(float32(0.1))), 0.1))
	assert.True(t, route(t, mv(Float32, float64(float32(0.1))), 0.10000000000000002))
	assert.True(t, route(t, mv(Float64, 0.1), 0.1))
	assert.False(t, route(t, mv(Float64, float64(float32(0.1))), 0.1))
	// At a set split, a missing value goes by missing_left, not membership.
	f := setSplit(MatchFloor, Float64, 5)
	f.HasMissingValue, f.MissingValue = true, 5
	f.Trees[0].MissingLeft[0] = false
	assert.False(t, route(t, f, 5), "5 is missing here, and missing goes right")
	f.Trees[0].ZeroMissing = []bool{true, false, false}
	f.Trees[0].Categories[0] = []int32{0}
	assert.False(t, route(t, f, 0), "zero counts as missing before it counts as category 0")
}

// f32 is shorthand for a float32 constant widened.
func f32(x float32) float64 { return float64(x) }

// Float32 accumulation, by hand: every addition rounds to float32.
func TestV2Float32Accumulation(t *testing.T) {
	f, err := ReadFile("testdata/v2-float32-logistic.json")
	require.NoError(t, err)
	raw := []float64{0}
	// x ≤ 0: leaves 2^24 and 1 from round32(0.1) = 0x1.99999ap-4.
	// round32(0x1.99999ap-4 + 2^24) = 2^24 (the 0.1 is below half an ulp,
	// which is 1 there), then 2^24 + 1 is a tie, to even: 2^24.
	// In float64 the sum would be 16777217.1.
	f.PredictRaw([]float64{-1}, raw)
	assert.Equal(t, 16777216.0, raw[0])
	// x > 0: 0x1.99999ap-4 − 0.5 = −0x1.99999ap-3 (exact: −0.4000000059604645),
	// plus 1 = 0x1.333333p-1 after rounding (0.600000023841858 rather
	// than 0.5999999940395355).
	f.PredictRaw([]float64{1}, raw)
	assert.Equal(t, f32(0x1.333333p-1), raw[0])
	assert.Equal(t, 0.6000000238418579, raw[0])
	// NaN goes left (missing_left).
	f.PredictRaw([]float64{math.NaN()}, raw)
	assert.Equal(t, 16777216.0, raw[0])
	// The logistic in float32: round32(1 / round32(1 + expf(−z))).
	out := []float64{0}
	f.Predict([]float64{1}, out)
	f.PredictRaw([]float64{1}, raw)
	z := float32(raw[0])
	d := Round32(1 + float64(Expf(-z))) // one float32 addition, done in float64 and rounded
	assert.Equal(t, Round32(1/d), out[0])
	assert.Equal(t, out[0], float64(float32(out[0])), "the output is a float32 value")
	assert.NotEqual(t, Sigmoid(0.6000000238418579), out[0], "and not the float64 logistic")
	assert.Equal(t, 1, f.ClassOf(out))
	f.Predict([]float64{-1}, out)
	assert.Equal(t, 1.0, out[0], "expf(−2^24) is 0")
}

// Average and vote under float32: the division and the base score are each
// one float32 operation.
func TestV2Float32AverageVote(t *testing.T) {
	leaf := func(v ...float64) Tree {
		return Tree{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1},
			MissingLeft: []bool{false}, Value: v}
	}
	avg := &Forest{Task: Regression, Features: []string{"x"}, InputPrecision: Float64, Combine: Average,
		Transform: NoTransform, Accumulate: Float32, BaseScore: []float64{0.1},
		Trees: []Tree{leaf(1), leaf(1), leaf(f32(0x1p-24))}}
	require.NoError(t, avg.Validate("a"))
	out := []float64{0}
	avg.Predict([]float64{0}, out)
	// Sum: 1 + 1 = 2, 2 + 2^-24 = 2 (half an ulp of 2 is 2^-23). 2/3 in
	// float32 is 0x1.555556p-1 = 0.666666686534881591796875; plus
	// round32(0.1) = 0.100000001490116119384765625 is 0.7666666880249977,
	// between the float32s 0.7666666507720947 and 0.7666667103767395, nearer
	// the second: 0x1.88888ap-1.
	assert.Equal(t, f32(0x1.88888ap-1), out[0])
	avg.Accumulate = Float64
	avg.Predict([]float64{0}, out)
	assert.Equal(t, (2+0x1p-24)/3+0.1, out[0], "float64: as in version 1")

	vote := &Forest{Task: Classification, Features: []string{"x"}, Classes: []string{"a", "b", "c"},
		InputPrecision: Float64, Combine: Vote, Transform: NoTransform, Accumulate: Float32,
		BaseScore: []float64{0, 0.1, 0}, Trees: []Tree{leaf(1, 0, 0), leaf(1, 0, 0), leaf(0, 1, 0)}}
	require.NoError(t, vote.Validate("v"))
	out = make([]float64, 3)
	vote.Predict([]float64{0}, out)
	// 2/3 → 0x1.555556p-1; 1/3 → 0x1.555556p-2, + 0x1.99999ap-4 →
	// 0x1.bbbbbcp-2 (0.43333333730697632); 0/3 = 0.
	assert.Equal(t, []float64{f32(0x1.555556p-1), f32(0x1.bbbbbcp-2), 0}, out)
}

// transform_scale: round32(round32(s)·acc) under float32, one float64
// multiplication otherwise, and allowed with transform none.
func TestV2TransformScale(t *testing.T) {
	f := &Forest{Task: Regression, Features: []string{"x"}, InputPrecision: Float64, Combine: Sum,
		Transform: NoTransform, Accumulate: Float32, TransformScale: 0.1, BaseScore: []float64{3},
		Trees: []Tree{{Feature: []int{-1}, Threshold: []float64{0}, Left: []int{-1}, Right: []int{-1},
			MissingLeft: []bool{false}, Value: []float64{0}}}}
	require.NoError(t, f.Validate("s"))
	out := []float64{0}
	f.Predict([]float64{0}, out)
	// round32(0.1) = 0.100000001490116; ×3 = 0.300000004470348, which
	// rounds to the float32 0x1.333334p-2 = 0.30000001192092896.
	assert.Equal(t, f32(0x1.333334p-2), out[0])
	f.Accumulate = Float64
	f.Predict([]float64{0}, out)
	assert.Equal(t, 0.30000000000000004, out[0], "0.1 × 3 in float64")
	raw := []float64{0}
	f.PredictRaw([]float64{0}, raw)
	assert.Equal(t, 3.0, raw[0], "raw scores come before the scale")
}

// normalize: each output over the in-order sum; a zero sum gives zeros.
func TestV2Normalize(t *testing.T) {
	z := []float64{1, -1, 0}
	ApplyTransform(Normalize, z)
	assert.Equal(t, []float64{0, 0, 0}, z)
	z = []float64{1, -1, 0}
	ApplyTransform32(Normalize, z)
	assert.Equal(t, []float64{0, 0, 0}, z)
	z = []float64{1, 2, 1}
	ApplyTransform(Normalize, z)
	assert.Equal(t, []float64{0.25, 0.5, 0.25}, z)
	// float32: 0.1f + 0.2f = 0.30000001192092896 after rounding; 0.1f /
	// that = 0.33333332...: 0x1.555554p-2; 0.2f / that = 0.66666665...,
	// between 0x1.555554p-1 (0.6666666269) and 0x1.555556p-1
	// (0.6666666865), nearer the first. (In float64 the shares are 1/3 and
	// 2/3 to within 1e-8; round32 of those would give 0x1.555556p-1.)
	z = []float64{f32(0.1), f32(0.2)}
	ApplyTransform32(Normalize, z)
	assert.Equal(t, []float64{f32(0x1.555554p-2), f32(0x1.555554p-1)}, z)
	assert.Equal(t, f32(float32(0.1)/(float32(0.1)+float32(0.2))), z[0])
}

// softmax under float32: expf of the float32 differences, summed in float64
// in order, the sum rounded to float32, each share one float32 division.
func TestV2Softmax32(t *testing.T) {
	z := []float64{0, f32(0x1p-30), -30}
	e := []float32{Expf(float32(0) - float32(0x1p-30)), Expf(0), Expf(float32(-30) - float32(0x1p-30))}
	assert.Equal(t, float32(1), e[1])
	s64 := float64(e[0]) + float64(e[1]) + float64(e[2])
	s := float32(s64)
	// Summing in float32 would round after each addition; the rule sums in
	// float64 and rounds once.
	ApplyTransform32(Softmax, z)
	for i := range e {
		assert.Equal(t, float64(e[i]/s), z[i], "share %d", i)
	}
	// The documented rounding points against float64 arithmetic: each
	// share is round32 of the exact quotient of two float32 values.
	for i := range e {
		assert.Equal(t, Round32(float64(e[i])/float64(s)), z[i])
	}
	// A large spread: the smallest share underflows in float32.
	z = []float64{0, -200}
	ApplyTransform32(Softmax, z)
	assert.Equal(t, []float64{1, 0}, z)
}

// exp and logistic_each, in both precisions.
func TestV2ExpLogisticEach(t *testing.T) {
	z := []float64{1, -2}
	ApplyTransform(Exp, z)
	assert.Equal(t, []float64{math.Exp(1), math.Exp(-2)}, z)
	z = []float64{1, -2}
	ApplyTransform32(Exp, z)
	assert.Equal(t, []float64{f32(Expf(1)), f32(Expf(-2))}, z)
	assert.Equal(t, f32(0x1.5bf0a8p+1), z[0], "expf(1) is e rounded to float32")
	z = []float64{1, -2}
	ApplyTransform(LogisticEach, z)
	assert.Equal(t, []float64{Sigmoid(1), Sigmoid(-2)}, z)
	z = []float64{0, 200}
	ApplyTransform32(LogisticEach, z)
	assert.Equal(t, []float64{0.5, 1}, z)
}

// Per-output trees and multi-output regression: the committed model, by
// hand. Trees: tree 0 adds (2,4) or (6,8); tree 1 adds 2 to output 1 only.
// Average per output: output 0 over 1 tree, output 1 over 2; base (0, 1);
// scale 0.5; exp.
func TestV2MultiOutputFile(t *testing.T) {
	f, err := ReadFile("testdata/v2-multi-output-exp.json")
	require.NoError(t, err)
	require.Equal(t, 2, f.NumOutputs())
	raw := make([]float64, 2)
	f.PredictRaw([]float64{-1}, raw)
	assert.Equal(t, []float64{2, (4+2)/2.0 + 1}, raw)
	out := make([]float64, 2)
	f.Predict([]float64{1}, out)
	assert.Equal(t, []float64{math.Exp(0.5 * 6), math.Exp(0.5 * ((8+2)/2.0 + 1))}, out)
}

// Softmax over per-output trees in float32, the committed model by hand.
func TestV2SoftmaxOutputTreesFile(t *testing.T) {
	f, err := ReadFile("testdata/v2-softmax-output-trees.json")
	require.NoError(t, err)
	raw := make([]float64, 3)
	f.PredictRaw([]float64{0, 5}, raw) // a ≤ 1: +1 to p; b > 1: +2 to q
	assert.Equal(t, []float64{1.5, 2.5, 0.5}, raw)
	out := make([]float64, 3)
	f.Predict([]float64{0, 5}, out)
	e := []float32{Expf(-1), Expf(0), Expf(-2)}
	s := float32(float64(e[0]) + float64(e[1]) + float64(e[2]))
	assert.Equal(t, []float64{f32(e[0] / s), f32(e[1] / s), f32(e[2] / s)}, out)
	assert.Equal(t, 1, f.ClassOf(out))
}

// The set-split file: truncate, zero_missing at node 1, missing_value −999.
func TestV2SetSplitFile(t *testing.T) {
	f, err := ReadFile("testdata/v2-set-split.json")
	require.NoError(t, err)
	for _, c := range []struct {
		model, vib, want float64
	}{
		{3, 1, 10},                    // member; 1 ≤ 2.5
		{3, 3, 20},                    // member; 3 > 2.5
		{-0.5, 0, 10},                 // truncates to 0, a member; 0 is missing at node 1, left
		{-0.5, -999, 10},              // −999 is missing: left
		{-999, 3, 30},                 // missing at node 0 goes right
		{1, 1, 30},                    // not listed
		{2147483647.9, 3, 20},         // truncates to 2^31 − 1
		{math.Inf(1), 1, 30},          // never a member
		{math.NaN(), 1, 30},           // missing, right
		{0, 1e-36, 10},                // |v| below the bound: missing, left
		{0, -ZeroMissingBound, 10},    // at the bound
		{0, 2 * ZeroMissingBound, 10}, // not missing, and ≤ 2.5
		{0, math.Inf(-1), 10},         // −Inf ≤ 2.5
		{math.Copysign(0, -1), 3, 20}, // −0 is category 0
	} {
		out := []float64{0}
		f.Predict([]float64{c.model, c.vib}, out)
		assert.Equal(t, c.want, out[0], "pump_model=%v vibration=%v", c.model, c.vib)
	}
}

// Vote with normalize, float32, exact matching: the committed model.
func TestV2NormalizeVoteFile(t *testing.T) {
	f, err := ReadFile("testdata/v2-normalize-vote.json")
	require.NoError(t, err)
	out := make([]float64, 3)
	f.Predict([]float64{2}, out) // tree 0: 2 listed → a; tree 1: a; tree 2: 2 > 0 → b
	// counts (2, 1, 0) / 3 in float32, then normalised by their float32 sum.
	a, b := float32(2)/3, float32(1)/3
	s := a + b
	assert.Equal(t, []float64{f32(a / s), f32(b / s), 0}, out)
	f.Predict([]float64{2.5}, out) // exact: 2.5 is not a member → b; a; 2.5 > 0 → b
	a, b = float32(1)/3, float32(2)/3
	s = a + b
	assert.Equal(t, []float64{f32(a / s), f32(b / s), 0}, out)
}

// Every version 2 file in testdata reads, writes as version 2, and reads
// back to the same forest and the same bytes; a model that uses none of
// version 2 writes as version 1 even when read from a version 2 file.
func TestV2RoundTrip(t *testing.T) {
	files, err := filepath.Glob("testdata/v2-*.json")
	require.NoError(t, err)
	require.NotEmpty(t, files)
	for _, path := range files {
		f, err := ReadFile(path)
		require.NoError(t, err, path)
		assert.Equal(t, 2, f.Version(), path)
		var a, b bytes.Buffer
		require.NoError(t, f.Encode(&a))
		assert.Contains(t, a.String(), `"sawmill_forest": 2,`)
		g, err := Decode(a.Bytes(), path, ReadOptions{})
		require.NoError(t, err, path)
		assert.Equal(t, f, g, path)
		require.NoError(t, g.Encode(&b))
		assert.Equal(t, a.String(), b.String(), path)
		src, err := os.ReadFile(path)
		require.NoError(t, err)
		for _, key := range f.V2Constructs() {
			key = strings.TrimPrefix(strings.Fields(key)[0], "trees[].")
			assert.Contains(t, string(src), `"`+key+`"`, "%s: V2Constructs names keys of the file", path)
		}
	}
	defaults := `{"sawmill_forest":2,"task":"regression","features":["a"],"accumulate":"float64","transform_scale":1,` +
		`"outputs":1,"category_match":"floor","trees":[` + stump2(`"categories":[null,null,null],"zero_missing":[false,true,true],`, "[1]", "[2]") + `]}`
	f, err := mustDecode(t, defaults)
	require.NoError(t, err)
	assert.Equal(t, 1, f.Version())
	var buf bytes.Buffer
	require.NoError(t, f.Encode(&buf))
	assert.Contains(t, buf.String(), `"sawmill_forest": 1,`)
	for _, key := range []string{"accumulate", "transform_scale", "outputs", "category_match", "categories", "zero_missing"} {
		assert.NotContains(t, buf.String(), key)
	}
	// A set split's threshold is written as 0.
	f, err = mustDecode(t, `{`+v2head+`"trees":[`+strings.Replace(stump2(`"categories":[[1],null,null],`, "[1]", "[2]"), `"threshold":[0,`, `"threshold":[7.5,`, 1)+`]}`)
	require.NoError(t, err)
	assert.Equal(t, 0.0, f.Trees[0].Threshold[0])
}

// The version 1 example is still written byte for byte as version 1.
func TestV1StillWritesV1(t *testing.T) {
	f, err := ReadFile("testdata/pump.json")
	require.NoError(t, err)
	assert.Equal(t, 1, f.Version())
	assert.Empty(t, f.V2Constructs())
	var buf bytes.Buffer
	require.NoError(t, f.Encode(&buf))
	assert.True(t, strings.HasPrefix(buf.String(), "{\n  \"sawmill_forest\": 1,\n  \"task\": \"classification\",\n"))
}
