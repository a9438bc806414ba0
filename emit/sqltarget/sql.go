package sqltarget

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// Dialect is the SQL engine the statement is written for.
type Dialect string

const (
	SQLite   Dialect = "sqlite"
	Postgres Dialect = "postgres"
	DuckDB   Dialect = "duckdb"
	ANSI     Dialect = "ansi"  // ISO/IEC 9075:2016, no engine's extensions
	MySQL    Dialect = "mysql" // MySQL 8 and MariaDB 10.11 (only MariaDB is run)
	Spark    Dialect = "spark" // Spark SQL 4
)

// Dialects lists every dialect, in the order help texts show them.
var Dialects = []Dialect{SQLite, Postgres, DuckDB, ANSI, MySQL, Spark}

// ParseDialect returns the dialect named s.
func ParseDialect(s string) (Dialect, error) {
	for _, d := range Dialects {
		if string(d) == s {
			return d, nil
		}
	}
	names := make([]string, len(Dialects))
	for i, d := range Dialects {
		names[i] = string(d)
	}
	return "", fmt.Errorf("unknown SQL dialect %q\nhint: use one of %s", s, strings.Join(names, ", "))
}

// Options controls the statement.
type Options struct {
	Dialect Dialect // "" means ANSI
	// Table is the relation the statement reads, one column per feature
	// named exactly like the feature; "" means "input". Schema, when set,
	// qualifies it. Both are quoted as identifiers, whatever they hold.
	Table, Schema string
	// Keep names columns of Table passed through to the result, first and
	// in this order.
	Keep []string
	// View, when set, makes the statement CREATE VIEW View AS ... (in
	// Schema, when that is set).
	View string
	// Layout is Auto (""), Nested or Table; see the package doc.
	Layout string
	// MaxNest bounds how deep CASE expressions nest; 0 means the dialect's
	// default (DefaultMaxNest), which for sqlite and ansi is what stock
	// SQLite 3.40 parses, with margin. Lower it for engines with smaller
	// parser stacks, raise it for builds with bigger ones.
	MaxNest int
	// TreesPerStage is how many trees one sub-query adds to the running
	// sums; 0 means 100.
	TreesPerStage int
	// Comments is the comment knob (emit.NodeComments): 0 writes a comment
	// per node for programs of at most emit.CommentNodes nodes, 1 always,
	// -1 never.
	Comments int
	// Columns, when set, names the table column of each feature (one entry
	// per feature, in model order) instead of the feature's own name: for
	// models whose names no table can hold (empty, or equal up to case
	// where the engine folds it).
	Columns []string
	// Outputs, when set, names the output columns instead of OutputNames.
	Outputs []string
	// Version is the sawmill version the header names; emit.Version when
	// empty.
	Version string
	// Function, when set, writes SQL-bodied functions named after it
	// instead of a query (see function.go and FunctionNames): the caller
	// writes SELECT Function(a, b, c) FROM t, one argument per feature in
	// model order, NULL for a missing value. Keep, View and Table do not
	// apply.
	Function string
}

// ErrNames is wrapped by every error about a name the dialect cannot use
// as an identifier; Columns and Outputs are the way around it.
var ErrNames = errors.New("name not usable in SQL")

// DefaultMaxNest is the CASE nesting each dialect gets by default, well
// inside what was measured (see the package doc).
//
// SQLite and ANSI are held to the stock SQLite parser, which most SQLite
// users have (Python's sqlite3 module, the sqlite3 shell, Android, iOS):
// its LALR stack is a fixed YYSTACKDEPTH of 100 entries, and each CASE
// nested in a THEN takes about six. Measured with Debian's sqlite3 3.40.1
// (TestSQLiteShellLimits holds these figures): the worst shape this
// package writes, a CREATE VIEW over a chain of splits whose deeper child is
// always written first (THEN), parses at MaxNest 15 in sqlite text and 14
// in ansi text (whose CAST literals take more stack) and fails one deeper
// with "parser stack overflow"; nesting in ELSE only parses to 17 and 16;
// a plain SELECT of the same chain, one level more. SQLite 3.54.1 (the
// embedded driver's) grows its stack and accepts about 498. The defaults
// keep three levels (about 18 stack entries) of margin in sqlite and four
// in ansi, which must run wherever SQL runs.
//
// MariaDB 10.11 (Debian's 10.11.19, default thread_stack of 299,008 bytes)
// fails with "Thread stack overrun" past 538 levels of CASE in the worst
// shape as a query and 527 in the function form (TestMySQLLimits); the
// default keeps less than half of that.
var DefaultMaxNest = map[Dialect]int{SQLite: 12, Postgres: 500, DuckDB: 400, ANSI: 10, MySQL: 250, Spark: sparkMaxNest}

// Limits of stock SQLite other than the parser stack that a statement can
// meet, measured with Debian's sqlite3 3.40.1 (".limit" prints them, and
// each was hit at one past it): at most 2,000 columns in a result or table
// (SQLITE_MAX_COLUMN), expressions at most 1,000 deep (SQLITE_MAX_EXPR_DEPTH:
// a left-deep sum of 1,000 terms fails, 999 runs), at most 500 terms in a
// compound SELECT (SQLITE_MAX_COMPOUND_SELECT; the statement has none, and
// a multi-row VALUES of 5,000 rows is not one), and statements of at most
// 1,000,000,000 bytes (SQLITE_MAX_SQL_LENGTH).
const (
	sqliteMaxColumns   = 2000
	sqliteMaxSQLLength = 1_000_000_000
)

// unfactorAbove is the number of distinct thresholds above which SQLite
// text spells each comparison x <= coalesce(t, x). SQLite moves every
// constant operand of a comparison into the statement's prologue after a
// linear search of the constants moved so far, so prepare time grows with
// the square of the distinct thresholds (measured on SQLite 3.54.1: 1.8 s at
// 16,000, 9.2 s at 32,000); coalesce(t, x) is not constant, and its first
// argument is coded in place without that search (0.17 s and 0.49 s), at
// the price of one more step per comparison at run time. The value is t
// exactly, so the comparison is unchanged, NULL included.
const unfactorAbove = 5000

// FileName is the name of the one file Emit returns.
const FileName = "score.sql"

// Emit writes p as one SQL statement for o.Dialect.
func Emit(p *compile.Program, o Options) ([]emit.File, error) {
	g, err := newGen(p, o)
	if err != nil {
		return nil, err
	}
	g.statement()
	if err := g.checkSize(); err != nil {
		return nil, err
	}
	return []emit.File{{Name: FileName, Data: g.out.Bytes()}}, nil
}

// checkSize refuses a SQLite statement beyond the stock build's column and
// length limits (sqliteMaxColumns, sqliteMaxSQLLength), naming the limit,
// rather than leave the user a statement that fails to prepare.
func (g *gen) checkSize() error {
	if g.funcErr != nil {
		return g.funcErr
	}
	if g.d != SQLite {
		return nil
	}
	if g.maxCols > sqliteMaxColumns {
		return fmt.Errorf("sql: a sub-query of the statement has %d columns, and stock SQLite allows %d (SQLITE_MAX_COLUMN)\nhint: the model uses %d features and %d outputs; keep fewer columns, or use a build compiled with a larger SQLITE_MAX_COLUMN and another dialect's text", g.maxCols, sqliteMaxColumns, len(g.used), g.p.NumOutputs)
	}
	if n := g.out.Len(); n > sqliteMaxSQLLength {
		return fmt.Errorf("sql: the statement is %d bytes, and stock SQLite reads at most %d (SQLITE_MAX_SQL_LENGTH)\nhint: score the trees in several statements, or use the table layout, which is shorter", n, sqliteMaxSQLLength)
	}
	return nil
}

// Name is the target's name on the command line and in reports.
const Name = "sql"

// Layouts are the layouts Emit writes besides emit.Auto.
func Layouts() []string { return []string{emit.Nested, emit.Table} }

// Target is the SQL target's entry in the registry (emit/targets): its code
// runs in the engines of the dialects named like them.
func Target() emit.Target {
	return emit.Target{Name: Name, Layouts: Layouts(), Engines: []string{string(SQLite), string(DuckDB), string(Postgres), string(MySQL), string(Spark)},
		Emit: func(p *compile.Program, s emit.Settings) ([]emit.File, error) {
			files, err := Emit(p, Options{Layout: s.Layout, Comments: s.Comments})
			return Named(files, s.Name), err
		}}
}

// Named names the statement's file NAME.sql; with name "" the file keeps
// FileName.
func Named(files []emit.File, name string) []emit.File {
	for i := range files {
		if name != "" && files[i].Name == FileName {
			files[i].Name = name + ".sql"
		}
	}
	return files
}

// Resolve returns the layout Emit writes p in under o, and why. It makes
// every check Emit makes but writes no statement.
func Resolve(p *compile.Program, o Options) (layout, why string, err error) {
	g, err := newGen(p, o)
	if err != nil {
		return "", "", err
	}
	return g.layout, g.why, nil
}

type gen struct {
	p        *compile.Program
	d        Dialect
	o        Options
	layout   string
	why      string // why the layout (Resolve)
	nest     int    // CASE nesting budget
	chunk    int    // trees per accumulation stage
	comments bool
	// unfactor writes SQLite thresholds as coalesce(t, x); see unfactorAbove.
	unfactor bool
	// votes: an Average of two outputs whose every leaf is (1, 0) or
	// (0, 1); the trees sum output 1 only, and output 0 is the rest.
	votes bool
	out   bytes.Buffer

	used   []int    // used feature indices
	cols   []string // table column per feature
	outs   []string // output column names
	prefix string   // CTE name prefix
	ctes   []string // CTE texts so far
	last   string   // name of the last CTE
	stage  int
	// maxCols is the most columns a stage selects.
	maxCols int
	// per tree: preorder depth of every node, and leaf ordinals
	depth  [][]int32
	ord    [][]int32
	cutsOf [][]int32 // per tree, the table layout's stage depths (treeCuts)
	// function form (function.go): the PostgreSQL body's dollar quote,
	// and the statements written.
	dollar string
	stmts  []string
	// stageItems are the items of every stage, in order, without fences:
	// the mysql function form assigns them to variables.
	stageItems [][]string
	// funcErr is why the function form's text cannot be used (funcStyle.fits).
	funcErr error
}

func newGen(p *compile.Program, o Options) (*gen, error) {
	if err := emit.CheckProgram(Target(), p, false); err != nil {
		return nil, err
	}
	g := &gen{p: p, o: o, d: o.Dialect}
	if g.d == "" {
		g.d = ANSI
	}
	if _, err := ParseDialect(string(g.d)); err != nil {
		return nil, err
	}
	if g.o.Table == "" {
		g.o.Table = "input"
	}
	g.nest = o.MaxNest
	if g.nest == 0 {
		g.nest = DefaultMaxNest[g.d]
	}
	if g.nest < 2 {
		return nil, fmt.Errorf("sql: MaxNest %d is too small: the table layout needs at least 2", g.nest)
	}
	g.chunk = o.TreesPerStage
	if g.chunk <= 0 && g.d == Spark {
		g.chunk = sparkTreesPerStage
	}
	if g.chunk <= 0 {
		g.chunk = 100
	}
	if p.Float32Accumulate() && !g.native32() {
		g.chunk = 1 // one float32 addition a stage: see sumStart
	}
	g.comments = emit.NodeComments(o.Comments, p)
	if err := g.checkNames(); err != nil {
		return nil, err
	}
	for ti := range p.Trees {
		t := &p.Trees[ti]
		for i := range t.Nodes {
			n := &t.Nodes[i]
			for _, v := range n.Value {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return nil, fmt.Errorf("sql: tree %d, node %d: leaf value %v is not a finite number, which SQL cannot spell", t.Source, n.ID, v)
				}
			}
		}
	}
	// A float32 model's base score, or its transform scale, can round to an
	// infinity in float32 (a finite float64 past float32's range). SQL has
	// no portable literal for it: the model is refused as one this target
	// cannot write, never emitted with a different number.
	for _, v := range p.BaseScore {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, &emit.Unsupported{Target: "sql", Construct: fmt.Sprintf("a base score of %v (past float32's range)", v)}
		}
	}
	if s := p.Scale(); p.Float32Accumulate() && s != 1 && math.IsInf(float64(float32(s)), 0) {
		return nil, &emit.Unsupported{Target: "sql", Construct: fmt.Sprintf("a transform scale of %v, which float32 rounds to an infinity", s)}
	}
	// A float32 sum, or the sum times the scale, that can reach float32's
	// range turns into an infinity in the interpreter (and NaN through
	// softmax or normalize), where the SQL engines' emulation of float32
	// rounding stays finite or fails: refused, never scored differently
	// (differential seed 1094: a leaf of 3.4028234663852886e+38 and a scale
	// of 1.0000001).
	if p.Float32Accumulate() {
		leaves, base := p.Magnitudes()
		if bound := (leaves + base) * max(1, math.Abs(p.Scale())); bound >= math.MaxFloat32 {
			return nil, &emit.Unsupported{Target: "sql", Construct: fmt.Sprintf("float32 sums that can reach float32's range (leaves and base score up to %v in size)", bound)}
		}
	}
	if err := g.checkMySQL(); err != nil {
		return nil, err
	}
	if err := g.checkFunction(); err != nil {
		return nil, err
	}
	if g.d == SQLite {
		seen := map[float64]bool{}
		for ti := range p.Trees {
			for _, n := range p.Trees[ti].Nodes {
				if !n.IsLeaf() {
					seen[n.Threshold] = true
				}
			}
		}
		g.unfactor = len(seen) > unfactorAbove
	}
	g.votes = binaryVotes(p)
	g.used = p.UsedFeatures()
	g.depth = make([][]int32, len(p.Trees))
	g.ord = make([][]int32, len(p.Trees))
	g.cutsOf = make([][]int32, len(p.Trees))
	maxDepth := 0
	for ti := range p.Trees {
		g.depth[ti], g.ord[ti] = treeInfo(&p.Trees[ti])
		maxDepth = max(maxDepth, p.Trees[ti].Depth())
	}
	switch o.Layout {
	case "", emit.Auto:
		g.layout, g.why = g.auto(maxDepth)
	case emit.Nested:
		if maxDepth > g.nest {
			for ti := range p.Trees {
				if d := p.Trees[ti].Depth(); d > g.nest {
					return nil, fmt.Errorf("sql: tree %d is %d splits deep, and the nested layout nests CASE at most %d deep for %s\nhint: use the table or auto layout", p.Trees[ti].Source, d, g.nest, g.d)
				}
			}
		}
		g.layout, g.why = emit.Nested, "asked for"
	case emit.Table:
		g.layout, g.why = emit.Table, "asked for"
	default:
		return nil, emit.UnknownLayout(Name, o.Layout, Layouts())
	}
	return g, nil
}

// checkMySQL refuses, in mysql text, a model whose outputs could be
// infinite: MySQL and MariaDB have no infinity, and raise "DOUBLE value is
// out of range" where exp overflows (measured on MariaDB 10.11: EXP(1000)
// fails, EXP(709.78) does not). Only the exp transform can overflow from
// finite sums; the bound is the leaves' and base score's sizes times the
// scale.
func (g *gen) checkMySQL() error {
	if g.d != MySQL || g.p.Transform != forest.Exp {
		return nil
	}
	leaves, base := g.p.Magnitudes()
	limit := expMax
	if g.p.Float32Accumulate() {
		limit = 88 // expf overflows past 88.72
	}
	if bound := (leaves + base) * math.Abs(g.p.Scale()); bound > limit {
		return &emit.Unsupported{Target: "sql", Construct: fmt.Sprintf("the exp transform of sums up to %v in size in mysql text (MySQL has no infinity, and EXP raises an error past %v)", bound, limit)}
	}
	return nil
}

// auto picks the layout: table for DuckDB (measured 2.8 times faster than
// nested on a 100-tree forest of two walked outputs: its vectorised CASE
// pays for every nested branch; for binary votes, one walk a tree, the two
// ran about even on the Breast Cancer forest of bench/sql, 74,600 rows/s
// for table against 72,000, and table prepared in 193 ms against 693), for
// trees deeper than the nesting budget, and for models of more than two
// outputs (where nested repeats each tree once per output); nested
// otherwise.
func (g *gen) auto(maxDepth int) (layout, why string) {
	switch {
	case g.d == DuckDB:
		return emit.Table, "DuckDB's vectorised CASE pays for every nested branch"
	case g.d == Spark:
		return emit.Table, sparkAutoWhy
	case maxDepth > g.nest:
		return emit.Table, fmt.Sprintf("a tree %d splits deep, and %s nests CASE at most %d deep", maxDepth, g.d, g.nest)
	case g.d == MySQL && g.o.Function != "":
		// Each stage is a SET the stored program runs per call, and the
		// table layout has three times the stages: measured on MariaDB
		// 10.11, nested 1.8 s against table 6.5 s (golden case
		// sklearn-breast-cancer, 953 rows) and 3.2 s against 4.7 s
		// (sklearn-wine, 3 classes).
		return emit.Nested, "a MySQL function runs each stage as a statement, and nested has the fewest"
	case g.p.NumOutputs > 2:
		return emit.Table, fmt.Sprintf("%d outputs, for which nested code repeats each tree once per output", g.p.NumOutputs)
	}
	return emit.Nested, "nested CASE is readable and fits the dialect's nesting"
}

// checkNames validates every name that reaches the statement and the
// result's column names, which must be distinct as the dialect compares
// identifiers. Problems with names wrap ErrNames.
func (g *gen) checkNames() error {
	p := g.p
	g.cols = make([]string, len(p.Features))
	for i, f := range p.Features {
		g.cols[i] = f.Name
	}
	if g.o.Columns != nil {
		if len(g.o.Columns) != len(p.Features) {
			return fmt.Errorf("sql: %d column names for %d features", len(g.o.Columns), len(p.Features))
		}
		copy(g.cols, g.o.Columns)
	}
	g.outs = OutputNames(p)
	if g.o.Outputs != nil {
		if len(g.o.Outputs) != p.NumOutputs {
			return fmt.Errorf("sql: %d output names for %d outputs", len(g.o.Outputs), p.NumOutputs)
		}
		g.outs = slices.Clone(g.o.Outputs)
	}
	bad := func(err error) error { return fmt.Errorf("sql: %w: %v", ErrNames, err) }
	for _, c := range p.Classes {
		if strings.IndexByte(c, 0) >= 0 || !utf8.ValidString(c) {
			if err := checkText("class label", c); err != nil {
				return bad(err)
			}
		}
	}
	for _, k := range g.o.Keep {
		if err := checkText("kept column", k); err != nil {
			return bad(err)
		}
	}
	if err := checkText("table", g.o.Table); err != nil {
		return bad(err)
	}
	if err := g.d.checkLength("table", g.o.Table, 64); err != nil {
		return bad(err)
	}
	if g.o.Schema != "" {
		if err := checkText("schema", g.o.Schema); err != nil {
			return bad(err)
		}
	}
	if g.o.View != "" {
		if err := checkText("view", g.o.View); err != nil {
			return bad(err)
		}
	}
	seen := map[string]string{}
	for _, i := range p.UsedFeatures() {
		n := g.cols[i]
		if err := checkText("feature column", n); err != nil {
			return bad(err)
		}
		if err := g.d.checkLength("feature column", n, 64); err != nil {
			return bad(err)
		}
		f := g.d.foldName(n)
		if prev, ok := seen[f]; ok {
			return bad(fmt.Errorf("features %q and %q name the same column in %s\nhint: rename one of them in the model, or map them to other columns (sawmill compile --columns feature=column,...; Options.Columns)", prev, n, g.d))
		}
		seen[f] = n
	}
	seen = map[string]string{}
	for _, c := range g.resultColumns() {
		if err := checkText("result column", c); err != nil {
			return bad(err)
		}
		if err := g.d.checkLength("result column", c, 256); err != nil {
			return bad(err)
		}
		f := g.d.foldName(c)
		if prev, ok := seen[f]; ok {
			return bad(fmt.Errorf("result columns %q and %q clash in %s (result: kept columns, then outputs, then class)\nhint: keep other columns, relabel the classes, or name the outputs (Outputs)", prev, c, g.d))
		}
		seen[f] = c
	}
	g.prefix = "sawmill_"
	for strings.HasPrefix(g.d.foldName(g.o.Table), g.d.foldName(g.prefix)) {
		g.prefix = "x" + g.prefix
	}
	return nil
}

// resultColumns names the result's columns in order.
func (g *gen) resultColumns() []string {
	cols := slices.Clone(g.o.Keep)
	cols = append(cols, g.outs...)
	if g.p.IsClassifier() {
		cols = append(cols, "class")
	}
	return cols
}

// OutputNames names the output columns: the class labels for a classifier
// (for one logistic output, p(class 1), the label of class 1), "prediction"
// for one regression output, "prediction_<j>" for several.
func OutputNames(p *compile.Program) []string {
	if p.IsClassifier() {
		if p.NumOutputs == 1 {
			return []string{p.Classes[1]}
		}
		return slices.Clone(p.Classes[:p.NumOutputs])
	}
	if p.NumOutputs == 1 {
		return []string{"prediction"}
	}
	var out []string
	for j := 0; j < p.NumOutputs; j++ {
		out = append(out, "prediction_"+strconv.Itoa(j))
	}
	return out
}

// treeInfo returns each node's depth and each leaf's ordinal (its rank
// among the tree's leaves in preorder; -1 at splits).
func treeInfo(t *compile.Tree) (depth, ord []int32) {
	depth = make([]int32, len(t.Nodes))
	ord = make([]int32, len(t.Nodes))
	k := int32(0)
	for i := range t.Nodes {
		n := &t.Nodes[i]
		if n.IsLeaf() {
			ord[i] = k
			k++
			continue
		}
		ord[i] = -1
		depth[n.Left] = depth[i] + 1
		depth[n.Right] = depth[i] + 1
	}
	return depth, ord
}

// Stages returns the number of sub-queries (common table expressions) the
// statement for p under o has.
func Stages(p *compile.Program, o Options) (int, error) {
	g, err := newGen(p, o)
	if err != nil {
		return 0, err
	}
	g.statement()
	return g.stage, nil
}

// binaryVotes reports whether p averages two outputs whose leaves are all
// one-hot, (1, 0) or (0, 1): the forests of class votes and of pure leaves
// that fully grown classification trees have. Then the interpreter's sums
// are counts, exact in a double, and output 0's count is the number of
// trees less output 1's, so each tree need be walked for one output only.
func binaryVotes(p *compile.Program) bool {
	if p.Combine != forest.Average || p.NumOutputs != 2 || p.Float32Accumulate() {
		return false
	}
	one, zero := math.Float64bits(1), math.Float64bits(0)
	for ti := range p.Trees {
		if p.Trees[ti].HasOutput {
			return false
		}
		for _, n := range p.Trees[ti].Nodes {
			if !n.IsLeaf() {
				continue
			}
			a, b := math.Float64bits(n.Value[0]), math.Float64bits(n.Value[1])
			if !(a == one && b == zero || a == zero && b == one) {
				return false
			}
		}
	}
	return true
}
