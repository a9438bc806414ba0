package verify

import (
	"testing"

	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// perfectCases are golden cases the perfect layout writes (none falls
// back): NaN to both sides, float32 sums, softmax, several outputs, a
// float32 model's midpoints, votes. (diff-sqlite-1000-classes, 1,000
// outputs, ran past ten minutes under this matrix; the golden suite builds
// it with gcc -O2.)
var perfectCases = []string{"edge-nan-routing", "v2-accumulate32-sum", "edge-softmax",
	"v2-multi-output-regression", "edge-float32", "edge-vote"}

// TestCPerfectBuilds builds the perfect layout with gcc -O2 and -O3 and
// clang -O2 under the address and undefined-behaviour sanitizers (an index
// past a perfect tree's arrays would show there) and requires every build
// to print the same bytes and those to be the interpreter's, in double and
// float; the driver checks NAME_predict_batch (blocks of 16, a part block,
// rows one by one) against NAME_predict. Cost: 6 cases x 2 variants x 3
// builds, about 90 s of gcc/clang on 2 shared cores.
func TestCPerfectBuilds(t *testing.T) {
	testenv.Need(t, cTools(true))
	matrix := []cBuild{{"gcc", "c99", "O2", false}, {"gcc", "c11", "O3", false}, {"clang", "c11", "O2", true}}
	checkLayoutBuilds(t, ctarget.Perfect, perfectCases, matrix)
}
