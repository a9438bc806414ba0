package verify

import (
	"math"
	"os"
	"testing"

	"github.com/stretchr/testify/assert"
)

// Compare is bit-exact where asked: -0 differs from +0, NaN agrees with
// NaN, one ulp is a mismatch; within a bound only when not exact, and then
// labels are forgiven only where the reference's top two are within 2×bound.
func TestCompare(t *testing.T) {
	negZero := math.Copysign(0, -1)
	want := []float64{0.25, 0.75, negZero, math.NaN()}
	assert.True(t, Compare(want, []float64{0.25, 0.75, negZero, math.NaN()}, nil, nil, 2, true, 0).OK())
	m := Compare(want, []float64{0.25, 0.75, 0, math.NaN()}, nil, nil, 2, true, 0)
	assert.False(t, m.OK())
	assert.Equal(t, 1, m.FirstRow)
	assert.Equal(t, 0, m.FirstOutput)

	up := math.Nextafter(0.75, 1)
	assert.False(t, Compare(want[:2], []float64{0.25, up}, nil, nil, 2, true, 0).OK())
	assert.True(t, Compare(want[:2], []float64{0.25, up}, nil, nil, 2, false, 1e-15).OK())

	// a label that differs where the margin is wide fails even within bound
	m = Compare([]float64{0.2, 0.8}, []float64{0.2, 0.8}, []int{1}, []int{0}, 2, false, 1e-9)
	assert.False(t, m.OK())
	assert.Equal(t, 1, m.LabelMismatch)
	// and is forgiven on a near tie
	m = Compare([]float64{0.5, 0.5 + 1e-12}, []float64{0.5, 0.5}, []int{1}, []int{0}, 2, false, 1e-9)
	assert.True(t, m.OK(), m.String())
}

// goldenCases is the golden package's folder of cases, which the runners'
// tests and the differential test read and write.
const goldenCases = "../golden/testdata"

// requireEngines is set in CI (SAWMILL_REQUIRE_ENGINES): a runner whose
// toolchain or engine is missing fails there instead of skipping.
var requireEngines = os.Getenv("SAWMILL_REQUIRE_ENGINES") != ""

// testConfig holds the runners to more than a user's machine needs:
// generated C must build without a warning, and in CI with every compiler.
var testConfig = Config{Werror: true, AllCompilers: requireEngines}

// testRunners are the registered runners under testConfig.
func testRunners() []Runner { return RunnersWith(testConfig) }

// testCRunner is the C runner under testConfig.
func testCRunner() cRunner {
	return cRunner{Werror: testConfig.Werror, AllCompilers: testConfig.AllCompilers}
}
