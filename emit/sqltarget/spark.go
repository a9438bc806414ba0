package sqltarget

import "strings"

// Spark SQL's limits, measured with PySpark 4.0.1 in local mode on Java 17
// (see the package doc, "Spark SQL", and TestSparkLimits in verify).
const (
	// sparkMaxNest is the CASE nesting of spark text: Spark 4.0.1 parsed
	// CASE nested 100 and 200 deep, refused 300 and 400
	// (FAILED_TO_PARSE_TOO_COMPLEX) and overflowed its stack at 1,000.
	sparkMaxNest = 100
	// sparkTreesPerStage is how many trees one stage of spark text adds:
	// few stages, since Spark's analyzer resolves a chain of common table
	// expressions in at most spark.sql.analyzer.maxIterations (100) passes
	// (a 500-tree forest at 10 trees a stage failed with "Max iterations
	// (100) reached for batch Resolution"), and fewer trees a stage did not
	// shrink the generated code (the optimizer merges the stages again).
	sparkTreesPerStage = 100
)

// sparkArrayLookup writes the table layout's lookup for Spark: a constant
// array indexed by the leaf number, array(1.5e+00D, ...)[-n - 1] (the
// subscript counts from 0; leaf k has state -(k+1)). Spark folds an array
// of literals into one constant, so the lookup is one index per row.
//
// The lookup is guarded, CASE WHEN n < 0 THEN ... END (every state is
// negative once the descent is over, so the guard never takes its NULL
// branch): the second reference to n keeps Spark's CollapseProject from
// inlining the descent stage's nested CASE into the sum, which it does
// for a column used once. Unguarded, the sums of a 500-tree forest became
// one expression of 500 trees, whose code generation overflowed the
// executor's stack (docs/spark-limits.md; TestSparkStagesKeptApart).
func (g *gen) sparkArrayLookup(b *strings.Builder, n string, count int, v func(int) float64) {
	b.WriteString("CASE WHEN " + n + " < 0 THEN array(")
	for k := 0; k < count; k++ {
		if k > 0 {
			b.WriteString(", ")
		}
		b.WriteString(g.d.num(v(k)))
	}
	b.WriteString(")[-" + n + " - 1] END")
}

// sparkAutoWhy is why auto takes the table layout for Spark: measured on
// the 30 trees of sklearn-wine (golden/testdata), PySpark 4.0.1 local mode,
// the nested layout wrote a generated method of 48.7 KB and planned in 2.6
// to 5.6 s, the table layout (array lookups) 32.5 KB in 1.4 to 2.8 s; both
// scored every row bit for bit. For hundreds of trees the table layout is
// the one measured to run: its guarded lookups keep each stage a projection
// of its own (see sparkArrayLookup), where the nested layout's stages,
// whose running sums are each used once, merge into one expression of every
// tree by the same rule (not measured for nested; measured for the
// unguarded table); the guarded 500-tree Breast Cancer forest of
// bench/sqlscale scored in Spark, the unguarded one overflowed the stack
// (docs/spark-limits.md).
const sparkAutoWhy = "Spark's generated code is a third smaller for leaf numbers and array lookups than for nested CASE"

// SparkString is s as a spark text string literal (see Dialect.str); for
// the spark runner's tests.
func SparkString(s string) string { return Spark.str(s) }
