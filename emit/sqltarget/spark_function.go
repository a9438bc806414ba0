package sqltarget

import (
	"errors"
	"fmt"
	"strings"
)

// Spark's function form: CREATE OR REPLACE FUNCTION NAME(a0 DOUBLE, ...)
// RETURNS DOUBLE (STRING for the label) DETERMINISTIC CONTAINS SQL RETURN
// followed by the query form's WITH chain over the arguments (Spark 4.0 SQL
// reference, "CREATE FUNCTION (SQL)"). Measured with PySpark 4.0.1 in local
// mode on Java 17: Spark inlines the call into the caller's plan (the
// optimized plan of SELECT id, f(a, b) FROM t is one Project over the
// table, the body's stages folded into its expressions, and whole-stage
// code generation compiles it as it compiles the query form); a permanent
// function of the in-memory catalog and a TEMPORARY one plan alike. A NaN
// argument is a missing value, as a stored NaN is in the query form (the
// first stage's isnan test). The function records the session's
// spark.sql.ansi.enabled when it is created; the body is exact either way.

// sparkFunctionHead opens a Spark SQL function of args returning a double,
// or a string for the label.
func sparkFunctionHead(g *gen, name string, args []string, text bool) string {
	ret := "DOUBLE"
	if text {
		ret = "STRING"
	}
	return fmt.Sprintf("CREATE OR REPLACE FUNCTION %s(%s)\nRETURNS %s\nDETERMINISTIC CONTAINS SQL\nRETURN\n", g.funcRef(name), typed(args, "DOUBLE"), ret)
}

// sparkFunctionNote heads the definitions in spark text.
const sparkFunctionNote = "-- Spark SQL functions (CREATE FUNCTION ... RETURN query), measured on Spark 4.0.1: a call is\n" +
	"-- inlined into the caller's plan and compiled with it; CREATE TEMPORARY FUNCTION works alike\n" +
	"-- (without a schema). A NaN argument is a missing value, as NULL is.\n"

// ErrFunctionSize is wrapped by the error for a function form the engine
// was measured not to plan (a Spark function body past
// sparkFunctionMaxInlined once inlined).
var ErrFunctionSize = errors.New("function body too large for the engine")

// sparkFunctionMaxInlined bounds sparkInlined, the size of a function's
// body once Spark has collapsed its stages into one expression. Measured
// on random forests of 3 classes (four functions called in one SELECT,
// PySpark 4.0.1, two loaded cores): 200 trees, bodies up to 1.85e6 bytes,
// planned in 90 s; 400 trees, 3.0e6 bytes, in 181 s, with a generated
// method of 53,532 bytes, near Spark's hugeMethodLimit of 65,535 (see
// docs/spark-limits.md, "The function form").
const sparkFunctionMaxInlined = 2_000_000

// sparkFunctionFits refuses a function whose body Spark would inline into
// an expression past sparkFunctionMaxInlined bytes.
func (g *gen) sparkFunctionFits(result string) error {
	if n := g.sparkInlined(result); n > sparkFunctionMaxInlined {
		return fmt.Errorf("sql: %w: a Spark SQL function of this model would be inlined into an expression of %.3g bytes, past the %d that Spark 4.0.1 was measured to plan: Spark copies each stage of a function body into every place that reads it (a float32 model's rounding reads each sum ten times a stage)\nhint: emit the query instead (leave out --function), whose stages Spark keeps apart", ErrFunctionSize, n, sparkFunctionMaxInlined)
	}
	return nil
}

// sparkInlined is the length in bytes of the expression result becomes
// once every stage is substituted into the next, as Spark 4.0.1 does to a
// function body: the optimizer inlines a scalar sub-query over no table
// (the body, correlated to the call's arguments) only as one projection,
// and collapses the body's stages into it however often a column is read
// (measured: the 3-tree float32 model of golden case
// v2-normalize-float32, whose float32 rounding reads its argument ten
// times a stage, did not finish planning in 8 minutes, where its query
// form planned in 17 s). A float64 so that it cannot overflow.
func (g *gen) sparkInlined(result string) float64 {
	size := map[string]float64{}
	inlined := func(expr string) float64 {
		n := float64(len(expr))
		for _, w := range sqlWords(expr) {
			if v, ok := size[w]; ok {
				n += v - float64(len(w))
			}
		}
		return n
	}
	for _, items := range g.stageItems {
		next := map[string]float64{}
		for _, it := range items {
			k := strings.LastIndex(it, " AS ")
			if k < 0 {
				next[it] = size[it] // carried
				continue
			}
			next[it[k+4:]] = inlined(it[:k])
		}
		size = next
	}
	return inlined(result)
}

// sqlWords lists the identifiers of e outside string literals and
// comments, each as often as it occurs.
func sqlWords(e string) []string {
	var out []string
	for i := 0; i < len(e); {
		switch c := e[i]; {
		case c == '\'':
			j := strings.IndexByte(e[i+1:], '\'')
			if j < 0 {
				return out
			}
			i += j + 2
		case c == '-' && strings.HasPrefix(e[i:], "--"):
			j := strings.IndexByte(e[i:], '\n')
			if j < 0 {
				return out
			}
			i += j
		case isWordByte(c):
			j := i
			for j < len(e) && isWordByte(e[j]) {
				j++
			}
			if !('0' <= c && c <= '9') {
				out = append(out, e[i:j])
			}
			i = j
		default:
			i++
		}
	}
	return out
}
