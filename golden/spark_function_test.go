package golden

import (
	"os"
	"testing"
)

// sparkFunctionCases are the golden cases the spark runner's function
// variant runs on: the query form already runs every case in Spark, and
// the function form over all of them took 915 s on the two-core machine at
// load 15 to 25 (go test ./golden -run 'Golden/.*/spark/table-function',
// every case passing or declined), more than the query form's whole run;
// Spark plans and runs each request in seconds even for one row, and the
// large forests cost a minute each (edge-binary-votes 98 s, sklearn-wine
// 73 s, sklearn-breast-cancer 67 s). This subset covers NaN and -0
// (edge-nan-routing), names and labels needing quotes, each transform
// (logistic, softmax, normalize, exp, logistic per output), votes, a single
// leaf, float32 inputs and float32 sums without rounding stages, set
// splits, several outputs, underflow, and one real 30-tree classifier:
// 353 s wall, 260 s of it in Spark requests, at load 22 to 26.
// SAWMILL_SPARK_FUNCTION_ALL=1 runs every case.
var sparkFunctionCases = map[string]bool{
	"edge-nan-routing": true, "edge-hostile-names": true, "edge-logistic": true, "edge-vote": true,
	"edge-single-leaf": true, "edge-float32": true, "sklearn-wine": true, "v2-exp": true,
	"v2-logistic-each": true, "v2-multi-output-regression": true, "v2-normalize": true,
	"v2-output-trees-softmax": true, "v2-set-exact": true, "v2-missing-value-0": true,
	"v2-zero-missing-float32": true, "diff-pg-underflow": true,
}

// skipSparkFunction skips the spark function variant outside
// sparkFunctionCases, saying so.
func skipSparkFunction(t *testing.T, runner, variant, name string) {
	t.Helper()
	if runner != "spark" || variant != "function" || sparkFunctionCases[name] || os.Getenv("SAWMILL_SPARK_FUNCTION_ALL") != "" {
		return
	}
	t.Skip("skipped: the spark function variant runs on a subset of the cases (sparkFunctionCases; SAWMILL_SPARK_FUNCTION_ALL=1 runs all)")
}

// TestSparkFunctionCasesExist: every case of the subset is a golden case,
// so that renaming one cannot shrink the subset unseen.
func TestSparkFunctionCasesExist(t *testing.T) {
	for name := range sparkFunctionCases {
		if _, err := os.Stat("testdata/" + name + "/model.json"); err != nil {
			t.Errorf("sparkFunctionCases names %s: %v", name, err)
		}
	}
}
