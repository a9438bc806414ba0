// Package sqltarget emits a tree ensemble as one SQL statement: a SELECT (or, with
// Options.View, CREATE VIEW ... AS SELECT) that reads a table whose columns
// are named like the features and yields, in order, the kept columns, one
// column per output (class labels for a classifier; for a logistic binary
// model the one output p(class 1), named after class 1; "prediction" for
// regression) and, for a classifier, the predicted label as text in column
// "class" (argmax, ties to the lowest index; class 1 when a single logistic
// output is above 0.5). NULL is a missing value and goes where the split's
// missing_left says. Up to 8 classes the label is one CASE comparing every
// pair; more are reduced in stages, each replacing every 8 consecutive
// outputs by their largest value and its first position, so the statement
// grows in proportion to the classes, not their square (the softmax maximum
// likewise, and its denominator is a column summed at most 256 terms a
// stage, in the interpreter's order).
//
// # Dialects
//
// sqlite (SQLite 3.35 or later; the golden runner uses 3.54.1, embedded in
// modernc.org/sqlite v1.62.0, which has EXP, and the system sqlite3 shell,
// Debian's 3.40.1), postgres (PostgreSQL 12 or
// later; tested on 15), duckdb (tested on 1.5.6 through duckdb-go v2.10506.0)
// ansi (ISO/IEC 9075:2016 with no engine extension: the golden runners
// run the ANSI text on all three engines too), mysql (MySQL 8.0 and
// MariaDB 10.2 or later; only MariaDB 10.11, Debian's 10.11.19, is run
// here: MySQL itself is not) and spark (Spark SQL 4; tested on PySpark
// 4.0.1 in local mode, Java 17; see "Spark SQL" below).
//
// Identifiers are always delimited (a double quote inside is written twice;
// in mysql text backquotes, a backquote inside written twice, since
// ANSI_QUOTES is not assumed) and labels are character string literals (a
// single quote inside is written twice; in mysql text a backslash is
// CHAR(92 USING utf8mb4), which reads the same with or without
// NO_BACKSLASH_ESCAPES); nothing else is
// special inside either in any dialect, so names such as DROP TABLE t;--,
// quotes and backslashes stay names. PostgreSQL reads backslashes plainly only
// with standard_conforming_strings on (its default since 9.1); the header of
// postgres files says so. NUL bytes, invalid UTF-8 and empty names are
// refused (ErrNames); so are names that the dialect would take for the same
// column (SQLite and DuckDB ignore ASCII case even in delimited identifiers,
// PostgreSQL truncates to 63 bytes, MySQL ignores case and refuses column
// names over 64 characters or ending in a space). Options.Columns and Options.Outputs
// rename the columns when a model's names cannot be used.
//
// # Numbers
//
// Every threshold and leaf is spelled so that the engine reads back the same
// double and types it double precision (see Dialect.Literal): exponent form
// in SQLite, DuckDB and MySQL (DuckDB and MySQL read 0.1 as DECIMAL, SQLite
// reads 3 as INTEGER; TestMySQLFacts reads 211 doubles back bit for bit
// from MariaDB), ::float8 casts in PostgreSQL (which reads every literal with a
// point or exponent as numeric), CAST(... AS DOUBLE PRECISION) in ANSI.
// -0 is kept in every dialect (it matters only in a sum whose every term is
// -0), but MariaDB returns -0 as +0 (measured), so verify compares the two
// as equal for mysql alone. MySQL has neither NaN nor infinities: a DOUBLE
// column refuses them (load a missing value as NULL), EXP raises "DOUBLE
// value is out of range" past 709.78 and a sum past the largest double
// raises it too (verify declines such rows, naming the reason); a model
// whose exp transform could overflow is refused in mysql text, and the
// float32 logistic, whose expf may overflow, uses 1e300 for the infinity
// (1/(1+1e300) rounds to the same float32 0). Sums run in the interpreter's order: the base score (Sum) or zero
// (Average) plus each tree in tree order, left to right, never regrouped;
// Average divides by the number of trees, then adds the base score. Inputs
// are compared as doubles: the float32 pass has already turned float32-model
// comparisons into double ones. The logistic and softmax transforms are
// written as forest.ApplyTransform computes them; EXP is the engine's (the C
// library's), which differs from Go's math.Exp by one ulp on about one
// argument in seven, so transformed outputs match within a few ulps, not bit
// for bit. PostgreSQL raises an error where exp underflows, so postgres and
// ansi text give 0 below e^-708.
//
// # Shape of the statement
//
// A chain of common table expressions (stages), each stage a SELECT from the
// one before: the first renames the table's columns to short internal names
// (k0, x3, ...), so that no user name appears past it; then the trees, at
// most TreesPerStage (100) per stage, each stage adding its trees to running
// sums z0, z1, ... carried as columns; then the transform; then the final
// SELECT naming the result columns. Stages after the first are MATERIALIZED
// (sqlite, postgres, duckdb) so that no engine inlines the chain into one
// expression again; ANSI, MySQL and MariaDB have no such word, and their
// stages carry a ROW_NUMBER() OVER () column instead, which keeps SQLite
// and PostgreSQL from inlining them and makes MySQL and MariaDB
// materialize a derived table rather than merge it. Splitting the sum over stages keeps its order (each
// stage starts from the last one's partial sums) and keeps SQLite's
// expression depth limit (1000: a left-deep sum of more than about 990 trees
// fails) and DuckDB's (1000) away.
//
// A model that averages two outputs whose every leaf is (1, 0) or (0, 1)
// (votes, and the pure leaves of fully grown classification trees) walks
// each tree for output 1 only: the sums are counts, exact in a double, and
// a last stage gives output 0 as (trees - count) / trees + base, the
// interpreter's value bit for bit. It halves the work of a binary
// classifier (SQLite 3.40 CPU time on 100,000 rows of a 100-tree Breast
// Cancer forest, 5.5 s before, 3.3 s after).
//
// # Layouts
//
//   - nested: each tree is one nested CASE per output, its leaves the
//     values. Fastest for shallow trees with one or two outputs. A tree deeper
//     than MaxNest is refused.
//   - table: each tree first becomes a leaf number (an integer state, a
//     nested CASE per tree whose leaves are numbers), then one stage looks up
//     each output's value by a binary-search CASE on that number. A tree is
//     computed once whatever the number of outputs. Trees deeper than
//     MaxNest are walked in several stages: the state holds the node
//     reached so far, and each later stage picks the subtree to walk on by a
//     binary search on it, so no CASE nests deeper than MaxNest whatever the
//     depth of the tree. In PostgreSQL and DuckDB the lookup indexes a
//     constant array ('{...}'::float8[] and [...]) by the leaf number
//     instead of searching.
//   - auto: table for DuckDB (2.8 times faster than nested on a 100-tree
//     forest, measured; about even for binary votes, and faster to prepare),
//     for trees deeper than MaxNest and for models of more than two outputs;
//     nested otherwise, and for the mysql function form, where each stage
//     is a statement the stored program runs per call (nested 1.8 s, table
//     6.5 s in MariaDB 10.11 on golden case sklearn-breast-cancer).
//
// A fully flat form (one CASE per tree with a WHEN per leaf holding the whole
// root-to-leaf conjunction) is not offered: measured on SQLite it is 17 to
// 100 times slower than nested and prepares more slowly still.
//
// MaxNest defaults (DefaultMaxNest): sqlite 12, ansi 10, postgres 500,
// duckdb 400, mysql 250 (MariaDB 10.11 fails with "Thread stack overrun"
// past 538 levels at its default thread_stack, TestMySQLLimits; the table
// layout's lookup is a binary-search CASE, MariaDB having no arrays). sqlite and ansi text must run in stock SQLite (Debian's
// sqlite3 3.40.1, Python's sqlite3 module, Android, iOS), whose fixed
// 100-entry parser stack fails with "parser stack overflow" past 15 levels
// of CASE in sqlite text and 14 in ansi text in the worst shape written
// (measured, TestSQLiteShellLimits); SQLite 3.54.1 grows its stack and
// accepts about 498 (its expression depth limit of 1000, two levels per
// CASE), DuckDB 992 (max_expression_depth 1000), PostgreSQL 1,999 (parser
// memory). Stock SQLite's other limits a statement can meet are checked
// too: 2,000 columns a sub-query and 1,000,000,000 bytes are refused with
// an error naming the limit.
//
// # Functions
//
// With Options.Function (sawmill compile --function NAME) the stages
// become the body of SQL-bodied functions, so that a query reads SELECT
// id, NAME(a, b, c) FROM t: one argument per feature in model order, NULL
// for a missing value. PostgreSQL gets CREATE FUNCTION ... LANGUAGE sql
// IMMUTABLE, DuckDB a scalar macro (both a scalar sub-query of the
// stages), MySQL and MariaDB a DETERMINISTIC stored function whose body
// assigns each stage to local variables and returns the result (three
// times faster in MariaDB than a sub-query, which builds a temporary table
// per stage and call; in the mysql client the file switches DELIMITER around
// it), Spark 4 a SQL user-defined function, CREATE OR REPLACE FUNCTION
// ... RETURNS DOUBLE DETERMINISTIC CONTAINS SQL RETURN and the stages as a
// query (spark_function.go: Spark 4.0.1 inlines the call into the caller's
// plan and compiles it with whole-stage code generation like the query).
// SQLite and ANSI SQL have no SQL-bodied scalar functions: the option is
// refused there, with a hint to emit the query; each dialect's way of
// writing functions, or its refusal, is its entry in funcStyles. A
// function returns one
// value, so a model of one regression output gets NAME, and any other
// NAME_0, NAME_1, ... per output and, for a classifier, NAME for the
// label (FunctionNames). Each function walks every tree, so the form
// takes at most MaxFunctionOutputs (16) outputs. Per-row calls cost more
// than the query: in MariaDB 10.11 about 0.6 ms a call for the 30-tree
// forest of golden case sklearn-breast-cancer (1.8 ms as a sub-query),
// where the query scores its 953 rows in 40 ms; verify's "function" variant runs the form
// in PostgreSQL, DuckDB, MariaDB and Spark.
//
// # Stored NaN
//
// PostgreSQL and DuckDB store the double NaN and rank it above every
// number, so postgres, duckdb and ansi text turn a stored NaN into NULL in
// the first stage (featureInput) and it goes wherever missing values go.
//
// # Spark SQL
//
// Spark text quotes names with backquotes, writes every double with a D
// suffix (1.5e+00D, DOUBLE whatever spark.sql.legacy.exponentLiteralAsDecimal
// says; 237 values, random bits and hard cases, read back bit for bit under
// ANSI mode on and off: TestSparkLiterals), writes a label holding a quote
// or a backslash as its bytes, CAST(X'...' AS STRING) (Spark joins
// adjacent literals, so a doubled quote reads as nothing, and reads
// backslashes as escapes), and turns a stored NaN into NULL in
// the first stage (isnan), since Spark ranks NaN above every number and
// holds NaN = NaN true. It is exact with spark.sql.ansi.enabled on (Spark
// 4's default) and off: ANSI mode raises errors for integral and decimal
// overflow and for division by zero, doubles included, and the statement
// has no integral arithmetic and divides only by a tree count or a sum
// that is tested first (normalize) or at least 1 (softmax); EXP of a large
// argument is +Infinity and of a very negative one 0, no error, under both
// (TestSparkEngineFacts). -0 is kept (-0e+00D). Spark's EXP is Java's
// StrictMath or Math exp, within the Tolerance the other engines' C library
// exp is held to.
//
// Spark has no MATERIALIZED: it inlines every common table expression and
// its optimizer merges adjacent projections (CollapseProject) wherever no
// costly column would be computed twice, and whole-stage code generation
// writes the merged projections into one Java method. The limits, measured
// with PySpark 4.0.1, local[2], on a machine at load 10 to 24 (see
// docs/spark-limits.md for the commands):
//
//   - Generated code: on the 30-tree, 654-node sklearn-wine forest
//     (golden/testdata) the table layout's largest method was 32.5 KB of
//     bytecode, the nested layout's 48.7 KB, whatever the trees per stage
//     (2 to 100). A 50-tree, 2,112-node forest (bench/sqlscale) passes the
//     JVM's 64 KB limit on a method, at 50 trees a stage and at 10, and
//     with stages kept apart by a nondeterministic fence column (tried and
//     left out: it changed neither size nor speed). Spark then runs the
//     plan without whole-stage code generation, each expression compiled
//     alone, with a warning in its log (spark.sql.codegen.fallback, on by
//     default). Past spark.sql.codegen.hugeMethodLimit (65,535 bytes)
//     Spark drops whole-stage code generation with an INFO line only; past
//     HotSpot's 8,000-byte HugeMethodLimit a method is never JIT-compiled.
//     The verify runner reads the largest generated method of every
//     statement (codegenStringSeq) and fails above the first limit, sets
//     spark.sql.codegen.fallback=false and factoryMode CODEGEN_ONLY so no
//     code is interpreted unseen, and when whole-stage code generation
//     cannot compile, runs without it and says so in its report line.
//   - Speed: that fallback is slow: the 50-tree forest scored 2,300 to
//     2,500 rows a second where DuckDB scored 136,000 and PostgreSQL
//     80,000 (bench/sqlscale, 100,000 rows). A 500-tree, 21,138-node
//     forest killed the SparkContext: its optimizer had merged every stage
//     into one sum of 500 nested CASEs, whose code generation overflowed
//     the executor's stack. The lookup is therefore guarded, CASE WHEN
//     n < 0 THEN array(...)[-n - 1] END (always true once the descent is
//     over): referring to the leaf number twice keeps CollapseProject from
//     inlining the descent into the sum, so each stage stays a projection
//     of its own (TestSparkStagesKeptApart). In whole-stage code one
//     method still holds a stage's trees inline (a 10-tree stage of about
//     420 nodes passed 64 KB), and higher-order functions (aggregate,
//     transform) are interpreted in Spark 4.0.1 (CodegenFallback), so
//     large forests run without whole-stage code: so the guarded 500-tree
//     forest scored 1,000,000 rows at 3,045 rows/s in local[2] at load 9,
//     about 4 minutes of it compiling, and on the idle machine 10,000,000
//     rows at 29,980 rows/s (plan 6.9 s), beside DuckDB's 56,392 and
//     PostgreSQL's 21,841 on 1,000,000 (docs/spark-limits.md).
//   - Planning: 1.4 to 2.8 s for the 30-tree forest in the table layout,
//     2.6 to 5.6 s nested, 9 to 11 s for the 50-tree forest; the
//     1,000-class diff-sqlite-1000-classes case took 36 s.
//   - Nesting: CASE nested 100 and 200 deep parses, 300 and 400 are
//     refused (FAILED_TO_PARSE_TOO_COMPLEX), 1,000 overflows the parser's
//     stack: MaxNest is 100 (sparkMaxNest).
//   - Stages: the analyzer resolves a chain of common table expressions in
//     at most spark.sql.analyzer.maxIterations (100) passes; a 500-tree
//     forest at 10 trees a stage failed there, so stages hold 100 trees.
//
// auto writes the table layout (see sparkAutoWhy); the
// leaf value lookup indexes a constant array, array(...)[-n - 1], which
// Spark folds into one constant. The same statement runs unchanged on a
// cluster: only the partitions of the table differ.
//
// # Self-test
//
// Selftest writes a script that loads probe rows with the model's outputs,
// scores them through the statement (as a view) and returns the rows that
// differ, for engines sawmill cannot run itself.
//
// A 100,000-deep chain takes 253 stages in DuckDB (57 s for 10 rows, most of
// it binding) and 203 in PostgreSQL (5 s); ANSI text of that many fenced
// stages is not practical (PostgreSQL planned 1,000 of them for over ten
// minutes in 5 GB), nor is SQLite past a few hundred stages.
//
// # Size
//
// SQLite's prepare time grows with the square of the literals in one
// statement (constant factoring searches the constants seen so far): about
// 0.7 s at 48,000 literals and 13 s at 192,000 on SQLite 3.54.1. DuckDB binds
// about 60 µs per literal (12 s at 192,000). PostgreSQL parses 192,000 in
// 0.6 s, but its JIT compiles a large statement for minutes: run SET jit =
// off in the session first (the postgres header says so; a statement cannot
// say it itself).
package sqltarget
