package sqltarget

import (
	"errors"
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
)

// The function form (Options.Function) writes the statement's stages as
// the body of SQL-bodied functions, one per result column, so that a user
// writes SELECT id, NAME(a, b, c) FROM t. The arguments are every feature in
// model order (unused ones too, so that a call reads like the model's
// feature list), NULL for a missing value. The first stage reads the
// arguments instead of a table; the rest of the chain is the query's.
//
// A model of one result column (a regression of one output) gets one
// function, NAME. Otherwise NAME_0, NAME_1, ... give the outputs (the
// probabilities of a classifier, in class order, or p(class 1) alone for
// a logistic binary model) and, for a classifier, NAME gives the label:
// SQL functions return one value, and one function per column is what
// every engine here can call. Each function walks the whole forest, so
// the form is bounded to MaxFunctionOutputs outputs.

// MaxFunctionOutputs is the most outputs the function form accepts: each
// output's function walks every tree, so a model of k outputs costs k+1
// walks a row, and per-row function calls cannot share them.
const MaxFunctionOutputs = 16

// mysqlFunctionMaxNest bounds MaxNest in the mysql function form, far
// below the depth at which CREATE FUNCTION crashed MariaDB (see
// checkFunction).
const mysqlFunctionMaxNest = 1000

// funcStyle is how a dialect writes a SQL-bodied function, or why it
// writes none: the one place a dialect says so.
type funcStyle struct {
	// refusal, when set, is why the dialect writes no functions (the
	// error's text after "sql: "); the other fields are then unset.
	refusal string
	// note, when set, is a comment written before the definitions.
	note string
	// head opens the definition of function name with the given argument
	// names, returning text (the label) or a double.
	head func(g *gen, name string, args []string, text bool) string
	// tail closes it; open and close wrap the body, a scalar query.
	tail string
	// fits, when set, refuses a body the engine cannot plan: it is given
	// each function's result expression once the stages are written.
	fits func(g *gen, result string) error
	// body, when set, writes the body itself (from the stages and the
	// result expression) instead of a WITH chain and tail.
	body func(g *gen, result string) string
}

// funcStyles lists every dialect: how it writes SQL-bodied functions, or
// its refusal.
var funcStyles = map[Dialect]funcStyle{
	SQLite: {refusal: noFunctionsText(SQLite)},
	ANSI:   {refusal: noFunctionsText(ANSI)},
	// PostgreSQL 12+: CREATE FUNCTION ... LANGUAGE sql IMMUTABLE (PostgreSQL
	// 15 manual, "CREATE FUNCTION"); the body is a dollar-quoted string.
	Postgres: {head: func(g *gen, name string, args []string, text bool) string {
		ret := "float8"
		if text {
			ret = "text"
		}
		return fmt.Sprintf("CREATE OR REPLACE FUNCTION %s(%s)\nRETURNS %s LANGUAGE sql IMMUTABLE PARALLEL SAFE AS %s\n",
			g.funcRef(name), typed(args, "float8"), ret, g.dollar)
	}},
	// DuckDB: a scalar macro whose body is a scalar sub-query (DuckDB
	// manual, "CREATE MACRO Statement").
	DuckDB: {head: func(g *gen, name string, args []string, _ bool) string {
		return fmt.Sprintf("CREATE OR REPLACE MACRO %s(%s) AS (\n", g.funcRef(name), strings.Join(args, ", "))
	}, tail: ")"},
	// MySQL 8 and MariaDB: a stored function whose body is RETURN of a
	// scalar sub-query, with no semicolon inside, so no DELIMITER is needed
	// (MySQL 8.0 manual, "CREATE PROCEDURE and CREATE FUNCTION").
	MySQL: {head: func(g *gen, name string, args []string, text bool) string {
		ret := "DOUBLE"
		if text {
			ret = fmt.Sprintf("VARCHAR(%d) CHARACTER SET utf8mb4", g.labelChars())
		}
		return fmt.Sprintf("CREATE FUNCTION %s(%s)\nRETURNS %s DETERMINISTIC\n", g.funcRef(name), typed(args, "DOUBLE"), ret)
	}, body: (*gen).mysqlBody},
	// Spark 4: a SQL user-defined function whose body is a query (Spark
	// 4.0 SQL reference, "CREATE FUNCTION (SQL)"); see sparkFunctionHead.
	Spark: {head: sparkFunctionHead, note: sparkFunctionNote, fits: (*gen).sparkFunctionFits},
}

// noFunctionsText is the refusal of dialect d, which has no SQL-bodied
// scalar functions.
func noFunctionsText(d Dialect) string {
	return fmt.Sprintf("%s has no SQL-bodied scalar functions (CREATE FUNCTION with a SQL body)\nhint: emit the query instead (leave out --function), or use postgres, duckdb, mysql or spark", d)
}

// ErrNoFunctions is wrapped by the error for Options.Function in a dialect
// without SQL-bodied scalar functions.
var ErrNoFunctions = errors.New("dialect has no SQL-bodied functions")

// argName is the function argument of feature i.
func argName(i int) string { return "a" + strconv.Itoa(i) }

func typed(args []string, typ string) string {
	out := make([]string, len(args))
	for i, a := range args {
		out[i] = a + " " + typ
	}
	return strings.Join(out, ", ")
}

// noFunctions is an error that says its own words and is ErrNoFunctions.
type noFunctions string

func (e noFunctions) Error() string        { return string(e) }
func (e noFunctions) Is(target error) bool { return target == ErrNoFunctions }

// checkFunction validates Options.Function.
func (g *gen) checkFunction() error {
	name := g.o.Function
	if name == "" {
		return nil
	}
	style, ok := funcStyles[g.d]
	if !ok {
		panic("BUG: dialect " + string(g.d) + " has no entry in funcStyles")
	}
	if style.refusal != "" {
		return noFunctions("sql: " + style.refusal)
	}
	if len(g.o.Keep) > 0 || g.o.View != "" {
		return errors.New("sql: the function form takes no kept columns and no view: the caller's SELECT names them")
	}
	if err := checkText("function name", name); err != nil {
		return fmt.Errorf("sql: %w: %v", ErrNames, err)
	}
	if g.d == MySQL && g.nest > mysqlFunctionMaxNest {
		return fmt.Errorf("sql: MaxNest %d: the mysql function form nests CASE at most %d deep (MariaDB 10.11 crashed on CREATE FUNCTION of a CASE 4,000 deep, measured; past about 540 the call fails anyway)", g.nest, mysqlFunctionMaxNest)
	}
	if k := g.p.NumOutputs; k > MaxFunctionOutputs {
		return fmt.Errorf("sql: the function form writes one function per output, each walking every tree, and accepts at most %d outputs; this model has %d\nhint: emit the query instead (leave out --function), which walks each tree once a row", MaxFunctionOutputs, k)
	}
	if g.d == Postgres {
		g.dollar = "$sawmill$"
		for strings.Contains(g.dollarScan(), g.dollar) {
			g.dollar = "$x" + g.dollar[1:]
		}
	}
	return nil
}

// dollarScan is the text a PostgreSQL dollar quote must not occur in: the
// class labels, the only free text in a body.
func (g *gen) dollarScan() string { return strings.Join(g.p.Classes, "\n") }

// funcRef is function name f, in Schema when one is set.
func (g *gen) funcRef(f string) string {
	if g.o.Schema != "" {
		return g.d.ident(g.o.Schema) + "." + g.d.ident(f)
	}
	return g.d.ident(f)
}

// labelChars is the longest class label in characters (at least 1).
func (g *gen) labelChars() int {
	n := 1
	for _, c := range g.p.Classes {
		n = max(n, utf8.RuneCountInString(c))
	}
	return n
}

// FunctionNames names the functions the function form writes for p, one
// per result column in order (outputs, then the class): see the comment
// at the top of function.go.
func FunctionNames(p *compile.Program, name string) []string {
	if p.NumOutputs == 1 && !p.IsClassifier() {
		return []string{name}
	}
	var out []string
	for j := 0; j < p.NumOutputs; j++ {
		out = append(out, name+"_"+strconv.Itoa(j))
	}
	if p.IsClassifier() {
		out = append(out, name)
	}
	return out
}

// functions writes one function per result column after the header and
// keeps each statement in g.stmts (FunctionStatements).
func (g *gen) functions() {
	style := funcStyles[g.d]
	label := g.label()
	args := make([]string, len(g.p.Features))
	for i := range args {
		args[i] = argName(i)
	}
	names := FunctionNames(g.p, g.o.Function)
	if style.note != "" {
		g.out.WriteString(style.note)
	}
	for c, name := range names {
		isLabel := c == g.p.NumOutputs
		if g.d == MySQL {
			g.stmts = append(g.stmts, "DROP FUNCTION IF EXISTS "+g.funcRef(name))
		}
		var b strings.Builder
		b.WriteString(style.head(g, name, args, isLabel))
		result := label
		if !isLabel {
			result = outCol(c)
		}
		if style.fits != nil && g.funcErr == nil {
			g.funcErr = style.fits(g, result)
		}
		if style.body != nil {
			b.WriteString(style.body(g, result))
			g.stmts = append(g.stmts, b.String())
			continue
		}
		g.writeWith(&b)
		b.WriteString("SELECT " + result + " FROM " + g.last + "\n" + style.tail)
		if g.d == Postgres {
			b.WriteString(g.dollar)
		}
		g.stmts = append(g.stmts, b.String())
	}
	for _, st := range g.stmts {
		if g.d == MySQL && strings.HasPrefix(st, "CREATE") {
			// The body holds semicolons: the mysql client needs another
			// delimiter around it; drivers take the statement as it is.
			g.out.WriteString("DELIMITER $$\n" + st + "$$\nDELIMITER ;\n")
			continue
		}
		g.out.WriteString(st + ";\n")
	}
	fmt.Fprintf(&g.out, "-- Call: SELECT %s FROM t;\n", emit.CommentSafe(g.callExample(names)))
}

// callExample is the SELECT list that calls every function on columns
// named like the features.
func (g *gen) callExample(names []string) string {
	cols := make([]string, len(g.cols))
	for i, c := range g.cols {
		cols[i] = g.d.ident(c)
	}
	call := "(" + strings.Join(cols, ", ") + ")"
	var items []string
	for _, n := range names {
		items = append(items, g.funcRef(n)+call)
	}
	return strings.Join(items, ", ")
}

// FunctionStatements returns the statements of the function form of p
// under o (o.Function set), without the header and the semicolons, for
// drivers that run one statement at a time.
func FunctionStatements(p *compile.Program, o Options) ([]string, error) {
	if o.Function == "" {
		return nil, errors.New("sql: FunctionStatements needs Options.Function")
	}
	g, err := newGen(p, o)
	if err != nil {
		return nil, err
	}
	g.statement()
	if g.funcErr != nil {
		return nil, g.funcErr
	}
	return g.stmts, nil
}

// mysqlBody is a stored function's body: every stage becomes one SET of
// local variables named like the stage's columns, and RETURN gives the
// result. Each call then runs a few assignments, where a scalar sub-query
// of common table expressions made MariaDB build a temporary table per
// stage and call (measured on MariaDB 10.11 on the 30-tree forest of
// golden case sklearn-breast-cancer: 1.8 ms a call as a sub-query, 0.6 ms
// so). SET assigns left to right, each expression seeing the values
// assigned before it (measured: SET a = b, b = a leaves both b), so no
// item of a stage may read a column assigned earlier in the same stage;
// every stage this package writes reads only its own column and columns
// it does not assign, which mysqlBody checks.
func (g *gen) mysqlBody(result string) string {
	var vars []string
	declared := map[string]bool{}
	var sets strings.Builder
	for _, items := range g.stageItems {
		var assigns []string
		var assigned []string
		for _, it := range items {
			k := strings.LastIndex(it, " AS ")
			if k < 0 {
				continue // carried: the variable keeps its value
			}
			expr, name := it[:k], it[k+4:]
			for _, a := range assigned {
				if a != name && readsName(expr, a) {
					panic(fmt.Sprintf("BUG: mysql function stage reads %s after assigning it: %s", a, expr))
				}
			}
			assigned = append(assigned, name)
			if !declared[name] {
				declared[name] = true
				vars = append(vars, name)
			}
			assigns = append(assigns, name+" = "+expr)
		}
		if len(assigns) > 0 {
			sets.WriteString("  SET " + strings.Join(assigns, ",\n    ") + ";\n")
		}
	}
	var b strings.Builder
	b.WriteString("BEGIN\n")
	if len(vars) > 0 {
		b.WriteString("  DECLARE " + strings.Join(vars, ", ") + " DOUBLE;\n")
	}
	b.WriteString(sets.String())
	b.WriteString("  RETURN " + result + ";\nEND")
	return b.String()
}

// readsName reports whether expression e names column n as a whole word.
func readsName(e, n string) bool {
	for i := 0; ; {
		k := strings.Index(e[i:], n)
		if k < 0 {
			return false
		}
		a, z := i+k, i+k+len(n)
		if (a == 0 || !isWordByte(e[a-1])) && (z == len(e) || !isWordByte(e[z])) {
			return true
		}
		i = z
	}
}

func isWordByte(c byte) bool {
	return c == '_' || '0' <= c && c <= '9' || 'a' <= c && c <= 'z' || 'A' <= c && c <= 'Z'
}
