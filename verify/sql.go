package verify

import (
	"cmp"
	"context"
	dbsql "database/sql"
	"errors"
	"fmt"
	"math"
	"net/url"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	"github.com/jackc/pgx/v5/pgconn"
	_ "github.com/jackc/pgx/v5/stdlib" // database/sql driver "pgx"
	_ "modernc.org/sqlite"             // database/sql driver "sqlite", pure Go

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// sqlRunner runs emitted SQL in a real engine: it creates a table with one
// double column per used feature (NULL for a missing value) plus a row
// number, loads the rows through bound float64 parameters (never text),
// runs the statement and reads every output back as float64.
//
// Variants: "" is the engine's own dialect; "ansi" runs the portable ANSI
// text on the same engine.
type sqlRunner struct {
	engine  string // "sqlite", "duckdb", "postgres" or "mysql"
	maxNest int    // Options.MaxNest of every statement; 0: the dialect's default
	dsn     string // postgres, mysql: the server (Config); "" for PostgresDSN(), MySQLDSN()
}

// sqliteRunner is the SQLite runner; it also keeps snapshots of the emitted
// text (the other engines' text differs only in literal spelling).
type sqliteRunner struct{ sqlRunner }

// Variants: the embedded engine ("" and "ansi" text) and the system sqlite3
// shell ("shell", "ansi-shell"), whose stock parser is the one most SQLite
// users have (see sqliteShell).
func (sqliteRunner) Variants() []string { return []string{"", "ansi", "shell", "ansi-shell"} }

// isShell reports whether a variant runs in the sqlite3 shell.
func isShell(variant string) bool { return variant == "shell" || variant == "ansi-shell" }

func (r sqlRunner) Name() string { return r.engine }

func (sqlRunner) Layouts() []string { return sqltarget.Layouts() }

// Variants: "" is the engine's own dialect, "ansi" the portable text
// (not in MySQL, which reads double quotes as strings), "function" the
// function form (not in SQLite, which has no SQL-bodied functions).
func (r sqlRunner) Variants() []string {
	if r.engine == "mysql" {
		return []string{"", functionVariant}
	}
	return []string{"", "ansi", functionVariant}
}

func (sqlRunner) CompileOptions(string) compile.Options { return compile.Options{} }

// Tolerance is sqltarget.Tolerance: bit for bit without a transform, within
// (k+4)·2^-52 under logistic or softmax (the engine's EXP).
//
// MySQL and MariaDB return -0 as +0 (measured on MariaDB 10.11, see
// TestMySQLFacts), so for them alone the runner compares within the bound
// (0 without a transform), under which -0 and +0 agree and every other
// value must still be the same double.
func (r sqlRunner) Tolerance(_ string, p *compile.Program) (bool, float64) {
	b := sqltarget.Tolerance(p)
	if r.engine == "mysql" {
		return false, b
	}
	return b == 0, b
}

func (r sqlRunner) dialect(variant string) sqltarget.Dialect {
	if variant == "ansi" || variant == "ansi-shell" {
		return sqltarget.ANSI
	}
	return map[string]sqltarget.Dialect{"sqlite": sqltarget.SQLite, "duckdb": sqltarget.DuckDB, "postgres": sqltarget.Postgres, "mysql": sqltarget.MySQL, "spark": sqltarget.Spark}[r.engine]
}

// sqlTable is the table the runners create; its name needs quoting.
const sqlTable = `rows "in" 'test'`

// options are the emit options a runner uses for p: the table, the row
// number kept, and, when the model's names cannot be SQL identifiers in
// this dialect, column names made from them.
func (r sqlRunner) options(p *compile.Program, layout, variant, schema string) (sqltarget.Options, error) {
	o := sqltarget.Options{Dialect: r.dialect(variant), Table: sqlTable, Schema: schema, Layout: layout, MaxNest: r.maxNest}
	o.Keep = []string{rowColumn(p)}
	// The engine's own rules for names hold whatever dialect the text is
	// written in (ANSI text run on PostgreSQL still has its identifiers
	// cut to 63 bytes), so names are checked under both.
	check := o
	check.Dialect = r.dialect("")
	_, _, err := sqltarget.Resolve(p, o) // Emit's checks, without writing the statement
	if err == nil && check.Dialect != o.Dialect {
		_, _, err = sqltarget.Resolve(p, check)
	}
	if errors.Is(err, sqltarget.ErrNames) {
		o.Columns = make([]string, len(p.Features))
		for i, f := range p.Features {
			o.Columns[i] = r.shortName("c"+strconv.Itoa(i)+" "+strings.ReplaceAll(f.Name, "\x00", ""), 64)
		}
		for j, n := range sqltarget.OutputNames(p) {
			o.Outputs = append(o.Outputs, r.shortName("o"+strconv.Itoa(j)+" "+strings.ReplaceAll(n, "\x00", ""), 256))
		}
		// What renaming cannot mend (a class label with a NUL byte, which
		// the class column must spell) is beyond SQL.
		_, _, err := sqltarget.Resolve(p, o)
		if errors.Is(err, sqltarget.ErrNames) {
			return o, fmt.Errorf("%w: %v", ErrDeclined, err)
		}
		if err != nil { // a refusal past the names (found with mysql names: diff-seed184)
			return o, declined(err)
		}
	} else if err != nil {
		return o, declined(err)
	}
	return o, nil
}

// shortName cuts a made-up column name to limit characters, keeps it
// from ending in a space and drops characters outside the Basic
// Multilingual Plane, for MySQL (see sqltarget's checkLength); other
// engines take it whole.
func (r sqlRunner) shortName(s string, limit int) string {
	if r.engine != "mysql" {
		return s
	}
	s = strings.Map(func(c rune) rune {
		if c > 0xFFFF {
			return -1
		}
		return c
	}, s)
	if rs := []rune(s); len(rs) > limit {
		s = string(rs[:limit])
	}
	return strings.TrimRight(s, " \t\n\v\f\r")
}

// rowColumn is the kept row-number column: "sawmill_row", with more
// underscores while some feature's name folds to it.
func rowColumn(p *compile.Program) string {
	name := "sawmill_row"
	for taken := true; taken; {
		taken = false
		for _, f := range p.Features {
			if strings.EqualFold(f.Name, name) {
				name += "_"
				taken = true
			}
		}
		for _, c := range p.Classes {
			if strings.EqualFold(c, name) {
				name += "_"
				taken = true
			}
		}
	}
	return name
}

func (r sqliteRunner) Emit(p *compile.Program, layout, variant string) ([]emit.File, error) {
	if err := r.declines(p, layout, variant); err != nil {
		return nil, err
	}
	o, err := r.options(p, layout, variant, "")
	if err != nil {
		return nil, err
	}
	o.Version = SnapshotVersion
	return sqltarget.Emit(p, o)
}

// sqlDB is an open engine session for one Score.
type sqlDB struct {
	conn    *dbsql.Conn
	schema  string // PostgreSQL: the fresh schema holding the table
	param   func(i int) string
	colType string
	close   func()
	// quote quotes an identifier (nil: double quotes); createTable opens
	// the load's CREATE TABLE (nil: "CREATE TABLE").
	quote       func(string) string
	createTable string
	// nanTwins: the engine stores NaN, so load adds, after the rows, a
	// copy of each row holding a missing value with NaN stored in place of
	// NULL, and run holds its outputs to the row's (see load).
	nanTwins bool
	// twins are the rows copied so by the last load, in order.
	twins []int
	// appendRows, when set, loads rows faster than INSERT (DuckDB's
	// appender): table and columns are plain names, row values float64 or
	// nil.
	appendRows func(ctx context.Context, schema, table string, rows func(add func(vals ...any) error) error) error
}

// open starts a session. file is the SQLite database file ("" for one in
// memory); the other engines ignore it.
func (r sqlRunner) open(ctx context.Context, file string) (*sqlDB, error) {
	switch r.engine {
	case "sqlite":
		if file == "" {
			file = ":memory:"
		}
		db, err := dbsql.Open("sqlite", file)
		if err != nil {
			return nil, err
		}
		db.SetMaxOpenConns(1) // every connection to :memory: is a database of its own
		conn, err := db.Conn(ctx)
		if err != nil {
			db.Close()
			return nil, err
		}
		return &sqlDB{conn: conn, param: func(int) string { return "?" }, colType: "REAL",
			close: func() { conn.Close(); db.Close() }}, nil
	case "duckdb":
		return openDuckDB(ctx)
	case "postgres":
		return openPostgres(ctx, r.dsn)
	case "mysql":
		return openMySQL(ctx, r.dsn)
	}
	panic("BUG: unknown SQL engine " + r.engine)
}

// DefaultPostgresDSN leaves every connection setting to PostgreSQL's own
// defaults as libpq defines them, which the pgx driver follows (the PGHOST,
// PGPORT, PGUSER, PGDATABASE, PGPASSWORD variables; else the local server,
// port 5432, the login user's name as user and database; "Connection
// Strings" and "Environment Variables" in the PostgreSQL manual), with a
// 5-second connect timeout.
const DefaultPostgresDSN = "connect_timeout=5"

// PostgresDSN is where the postgres runner connects when no Config names a
// server: $SAWMILL_POSTGRES_DSN, else DefaultPostgresDSN. chosen reports
// whether the variable named it: a server that does not answer at the
// default leaves postgres not run, one that was chosen fails.
func PostgresDSN() (dsn string, chosen bool) {
	if s := os.Getenv("SAWMILL_POSTGRES_DSN"); s != "" {
		return s, true
	}
	return DefaultPostgresDSN, false
}

// WithDSN points the postgres runner at the server dsn names.
func (r sqlRunner) WithDSN(dsn string) Runner { r.dsn = dsn; return r }

// redactDSN hides a password in a connection string for messages.
func redactDSN(dsn string) string {
	u, err := url.Parse(dsn)
	if err != nil || u.User == nil {
		return dsn
	}
	if _, ok := u.User.Password(); ok {
		u.User = url.UserPassword(u.User.Username(), "xxxxx")
	}
	return u.String()
}

// pgHint says how to create the database when the server answered that it
// does not exist (SQLSTATE 3D000, invalid_catalog_name, PostgreSQL's
// "Appendix A. Error Codes").
func pgHint(err error, dsn string) string {
	var pe *pgconn.PgError
	if !errors.As(err, &pe) || pe.Code != "3D000" {
		return ""
	}
	db := "NAME"
	if u, err := url.Parse(dsn); err == nil && strings.TrimPrefix(u.Path, "/") != "" {
		db = strings.TrimPrefix(u.Path, "/")
	}
	return fmt.Sprintf("\nhint: create the database first, e.g. createdb %s (or psql -c 'CREATE DATABASE %s')", db, db)
}

var pgSchemas atomic.Int64

// pingPatiently pings db, each try bounded by each, up to tries times
// while a try times out: a local server under a loaded test run has
// failed one accept in 10 s (a dial timeout in the differential test)
// and answered the next connection at once. Any other error is returned
// at once (no server, a refused login).
func pingPatiently(ctx context.Context, db *dbsql.DB, tries int, each time.Duration) error {
	var err error
	for try := 1; try <= tries; try++ {
		pctx, cancel := context.WithTimeout(ctx, each)
		err = db.PingContext(pctx)
		timedOut := pctx.Err() != nil
		cancel()
		if err == nil || ctx.Err() != nil || !(timedOut || strings.Contains(err.Error(), "timeout")) {
			return err
		}
	}
	return fmt.Errorf("%v (%d tries of %v)", err, tries, each)
}

func openPostgres(ctx context.Context, dsn string) (*sqlDB, error) {
	chosen := dsn != ""
	if !chosen {
		dsn, chosen = PostgresDSN()
	}
	db, err := dbsql.Open("pgx", dsn)
	if err != nil {
		return nil, err
	}
	fail := func(err error) (*sqlDB, error) {
		db.Close()
		if !chosen {
			return nil, fmt.Errorf("%w: no PostgreSQL server answers at PostgreSQL's defaults (%v); set SAWMILL_POSTGRES_DSN", ErrSkip, err)
		}
		return nil, fmt.Errorf("PostgreSQL at %s: %v%s", redactDSN(dsn), err, pgHint(err, dsn))
	}
	if err := pingPatiently(ctx, db, 3, 10*time.Second); err != nil {
		return fail(err)
	}
	conn, err := db.Conn(ctx)
	if err != nil {
		return fail(err)
	}
	schema := fmt.Sprintf("sawmill_test_%d_%d_%d", os.Getpid(), time.Now().UnixNano(), pgSchemas.Add(1))
	// JIT compiles large scoring statements for minutes (see the emitted
	// header); the session turns it off, as the header tells users to.
	for _, s := range []string{"SET jit = off", "SET standard_conforming_strings = on", "CREATE SCHEMA " + schema} {
		if _, err := conn.ExecContext(ctx, s); err != nil {
			conn.Close()
			db.Close()
			return nil, fmt.Errorf("postgres: %s: %v", s, err)
		}
	}
	return &sqlDB{conn: conn, schema: schema, param: func(i int) string { return "$" + strconv.Itoa(i+1) }, colType: "double precision", nanTwins: true,
		close: func() {
			conn.ExecContext(context.Background(), "DROP SCHEMA "+schema+" CASCADE")
			conn.Close()
			db.Close()
		}}, nil
}

func quoteIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// quoteFn is the session's identifier quoting.
func (db *sqlDB) quoteFn() func(string) string {
	if db.quote != nil {
		return db.quote
	}
	return quoteIdent
}

// load creates the table and inserts every row, NULL for NaN. Where the
// engine stores NaN (nanTwins), each row holding a missing value is loaded a
// second time after all the rows, numbered from rows.Len() on, with NaN
// stored instead of NULL: the statement must score a stored NaN exactly as
// NULL (emit/sqltarget's featureInput), which run checks bit for bit.
func (db *sqlDB) load(ctx context.Context, p *compile.Program, o sqltarget.Options, rows *forest.Rows) error {
	quoteIdent := db.quoteFn()
	ref := quoteIdent(o.Table)
	if o.Schema != "" {
		ref = quoteIdent(o.Schema) + "." + ref
	}
	used := p.UsedFeatures()
	db.twins = nil
	if db.nanTwins {
		for r := 0; r < rows.Len(); r++ {
			x := rows.Row(r)
			for _, i := range used {
				if math.IsNaN(x[i]) {
					db.twins = append(db.twins, r)
					break
				}
			}
		}
	}
	total := rows.Len() + len(db.twins)
	// fill sets vals to entry e's values: row e, or twin e-rows.Len().
	fill := func(e int, vals []any) {
		r, nan := e, false
		if e >= rows.Len() {
			r, nan = db.twins[e-rows.Len()], true
		}
		vals[0] = int64(e)
		x := rows.Row(r)
		for k, i := range used {
			switch {
			case !math.IsNaN(x[i]):
				vals[k+1] = x[i]
			case nan:
				vals[k+1] = math.NaN()
			default:
				vals[k+1] = nil
			}
		}
	}
	cols := []string{quoteIdent(o.Keep[0])}
	defs := []string{quoteIdent(o.Keep[0]) + " INTEGER"}
	for _, i := range used {
		name := p.Features[i].Name
		if o.Columns != nil {
			name = o.Columns[i]
		}
		cols = append(cols, quoteIdent(name))
		defs = append(defs, quoteIdent(name)+" "+db.colType)
	}
	create := cmp.Or(db.createTable, "CREATE TABLE")
	if _, err := db.conn.ExecContext(ctx, create+" "+ref+" ("+strings.Join(defs, ", ")+")"); err != nil {
		return fmt.Errorf("create table: %v", err)
	}
	if db.appendRows != nil {
		return db.appendRows(ctx, o.Schema, o.Table, func(add func(vals ...any) error) error {
			vals := make([]any, len(cols))
			for e := 0; e < total; e++ {
				fill(e, vals)
				if err := add(vals...); err != nil {
					return fmt.Errorf("append row %d: %v", e, err)
				}
			}
			return nil
		})
	}
	tx, err := db.conn.BeginTx(ctx, nil)
	if err != nil {
		return err
	}
	defer tx.Rollback()
	per := max(1, min(500, 30000/len(cols))) // rows per INSERT, inside every engine's parameter limit
	var stmt *dbsql.Stmt
	stmtRows := 0
	vals := make([]any, len(cols))
	for a := 0; a < total; a += per {
		b := min(a+per, total)
		if b-a != stmtRows {
			var q strings.Builder
			q.WriteString("INSERT INTO " + ref + " (" + strings.Join(cols, ", ") + ") VALUES ")
			k := 0
			for r := a; r < b; r++ {
				if r > a {
					q.WriteString(", ")
				}
				q.WriteString("(")
				for c := range cols {
					if c > 0 {
						q.WriteString(", ")
					}
					q.WriteString(db.param(k))
					k++
				}
				q.WriteString(")")
			}
			if stmt != nil {
				stmt.Close()
			}
			if stmt, err = tx.PrepareContext(ctx, q.String()); err != nil {
				return fmt.Errorf("insert: %v", err)
			}
			stmtRows = b - a
		}
		args := make([]any, 0, (b-a)*len(cols))
		for e := a; e < b; e++ {
			fill(e, vals)
			args = append(args, vals...)
		}
		if _, err := stmt.ExecContext(ctx, args...); err != nil {
			return fmt.Errorf("insert rows %d to %d: %v", a, b-1, err)
		}
	}
	if stmt != nil {
		stmt.Close()
	}
	return tx.Commit()
}

// Score implements Runner.
func (r sqlRunner) Score(ctx context.Context, p *compile.Program, layout, variant string, rows *forest.Rows, dir string) (*Result, error) {
	if err := r.declines(p, layout, variant); err != nil {
		return nil, err
	}
	if variant == functionVariant {
		return r.scoreFunction(ctx, p, layout, rows, dir)
	}
	return r.score(ctx, p, rows, dir, isShell(variant), func(schema string) (sqltarget.Options, error) {
		o, err := r.options(p, layout, variant, schema)
		if err == nil && isShell(variant) {
			o = shellOutputs(p, o)
		}
		return o, err
	})
}

// shellOutputs renames output columns named "true" or "false" (in any
// case) for the sqlite3 shell: SQLite 3.40 reads such a name as the
// boolean keyword where the shell's query reads the column (measured:
// select printf('%!.17g', "false") from (select 5.0 as "false") prints
// 0.0, and qualifying the name finds no column). The embedded engine runs
// the statement with the names as they are.
func shellOutputs(p *compile.Program, o sqltarget.Options) sqltarget.Options {
	outs := o.Outputs
	if outs == nil {
		outs = sqltarget.OutputNames(p)
	}
	for _, n := range outs {
		if strings.EqualFold(n, "true") || strings.EqualFold(n, "false") {
			o.Outputs = nil
			for j, n := range outs {
				o.Outputs = append(o.Outputs, "o"+strconv.Itoa(j)+" "+n)
			}
			return o
		}
	}
	return o
}

// Stage counts past which a run would take many minutes (trees thousands
// deep walked in that many sub-queries; measured): ANSI text cannot ask
// for materialization, and PostgreSQL planned 1,000 fenced stages for over
// ten minutes in 5 GB; SQLite's time grows with about the 2.5th power of
// the stages (2.7 s at 53, 15 s at 103).
const (
	maxANSIStages   = 100
	maxSQLiteStages = 300
)

// declines returns ErrDeclined for statements beyond those counts, and for
// the nested layout of a tree deeper than the CASE nesting allowed (auto
// takes the table layout for it).
func (r sqlRunner) declines(p *compile.Program, layout, variant string) error {
	d := r.dialect(variant)
	if nest := cmp.Or(r.maxNest, sqltarget.DefaultMaxNest[d]); layout == emit.Nested && p.MaxDepth() > nest {
		return fmt.Errorf("%w: nested layout of a tree %d splits deep, past the %d levels of CASE %s text may nest", ErrDeclined, p.MaxDepth(), nest, d)
	}
	n, err := sqltarget.Stages(p, sqltarget.Options{Dialect: d, Layout: layout, MaxNest: r.maxNest})
	if err != nil {
		return nil // Score reports it
	}
	switch {
	case variant == "ansi" && n > maxANSIStages:
		return fmt.Errorf("%w: ANSI text of %d sub-queries (more than %d) on %s", ErrDeclined, n, maxANSIStages, r.engine)
	case r.engine == "sqlite" && n > maxSQLiteStages:
		return fmt.Errorf("%w: %d sub-queries (more than %d) in SQLite", ErrDeclined, n, maxSQLiteStages)
	}
	return nil
}

// score runs p with the options opts gives for the session's schema ("" but
// in PostgreSQL). Options.Keep[0] must be the row-number column.
//
// With shell (SQLite only), the rows go into a database file and the
// system sqlite3 shell runs the statement (shellRun).
func (r sqlRunner) score(ctx context.Context, p *compile.Program, rows *forest.Rows, dir string, shell bool, opts func(schema string) (sqltarget.Options, error)) (*Result, error) {
	rows, err := r.loadable(p, rows)
	if err != nil {
		return nil, err
	}
	file := ""
	if shell {
		if _, _, err := SQLiteShell(); err != nil {
			return nil, err
		}
		f, cleanup, err := shellFile()
		if err != nil {
			return nil, err
		}
		defer cleanup()
		file = f
	}
	db, err := r.open(ctx, file)
	if err != nil {
		return nil, err
	}
	closed := false
	defer func() {
		if !closed {
			db.close()
		}
	}()
	o, err := opts(db.schema)
	if err != nil {
		return nil, err
	}
	files, err := sqltarget.Emit(p, o)
	if err != nil {
		return nil, err
	}
	text := string(files[0].Data)
	if dir != "" {
		if err := os.WriteFile(filepath.Join(dir, files[0].Name), files[0].Data, 0o644); err != nil {
			return nil, err
		}
	}
	if err := db.load(ctx, p, o, rows); err != nil {
		return nil, fmt.Errorf("%s: %v", r.engine, err)
	}
	if r.engine == "mysql" {
		if err := mysqlFits(ctx, db.conn, len(text)); err != nil {
			return nil, err
		}
	}
	if shell {
		db.close()
		closed = true
		return shellRun(ctx, p, o, text, file, rows.Len())
	}
	if o.View != "" { // create the view, then read it
		if _, err := db.conn.ExecContext(ctx, text); err != nil {
			return nil, fmt.Errorf("%s: create view: %v", r.engine, shorten(err))
		}
		text = "SELECT * FROM " + quoteIdent(o.View)
		if o.Schema != "" {
			text = "SELECT * FROM " + quoteIdent(o.Schema) + "." + quoteIdent(o.View)
		}
	}
	res, err := db.run(ctx, p, text, rows.Len(), len(o.Keep)-1, r.engine)
	if err == nil && r.engine == "mysql" {
		res.Toolchain = mysqlToolchain(ctx, db.conn)
	}
	if err == nil && r.engine == "sqlite" {
		var v string
		if db.conn.QueryRowContext(ctx, "SELECT sqlite_version()").Scan(&v) == nil {
			res.Toolchain = "SQLite " + v + " embedded in sawmill (modernc.org/sqlite)"
		}
	}
	return res, err
}

// runError is the error of a statement that failed to run. PostgreSQL
// raises "value out of range: overflow" where a float32 sum (a real column)
// passes float32's range, instead of giving an infinity as the interpreter
// does: for a float32-accumulating program that is a model the engine
// cannot score on these rows, declined with the reason, never a number
// that differs.
func runError(p *compile.Program, engine string, err error) error {
	if d := mysqlError(err); engine == "mysql" && d != nil {
		return d
	}
	if p.Float32Accumulate() && strings.Contains(err.Error(), "value out of range: overflow") {
		return fmt.Errorf("%w: %s raises overflow where a float32 sum passes float32's range: %v", ErrDeclined, engine, shorten(err))
	}
	return fmt.Errorf("%s: run: %v", engine, shorten(err))
}

// run prepares and runs the statement and reads the result: n rows and
// then the NaN twins of the last load. Build is the prepare time, Run the
// execution and reading.
func (db *sqlDB) run(ctx context.Context, p *compile.Program, text string, n, extraKeep int, engine string) (*Result, error) {
	start := time.Now()
	stmt, err := db.conn.PrepareContext(ctx, text)
	if err != nil {
		return nil, fmt.Errorf("%s: prepare: %v", engine, shorten(err))
	}
	defer stmt.Close()
	build := time.Since(start)
	start = time.Now()
	q, err := stmt.QueryContext(ctx)
	if err != nil {
		return nil, runError(p, engine, err)
	}
	defer q.Close()
	c := newCollector(p, n, db.twins, engine)
	var id int64
	vals := make([]dbsql.NullFloat64, p.NumOutputs)
	var label dbsql.NullString
	dest := []any{&id}
	for range extraKeep {
		dest = append(dest, new(any))
	}
	for j := range vals {
		dest = append(dest, &vals[j])
	}
	if p.IsClassifier() {
		dest = append(dest, &label)
	}
	for q.Next() {
		if err := q.Scan(dest...); err != nil {
			return nil, fmt.Errorf("%s: read result: %v", engine, err)
		}
		if err := c.add(id, vals, label); err != nil {
			return nil, err
		}
	}
	if err := q.Err(); err != nil {
		return nil, runError(p, engine, err)
	}
	res, err := c.finish()
	if err != nil {
		return nil, err
	}
	res.Build, res.Run = build, time.Since(start)
	return res, nil
}

// collector gathers a statement's result rows, numbered 0 to n-1 and then
// the NaN twins, whatever order they come in.
type collector struct {
	p       *compile.Program
	n       int
	twins   []int
	engine  string
	outputs []float64
	classes []int
	seen    []bool
	classOf map[string]int
}

func newCollector(p *compile.Program, n int, twins []int, engine string) *collector {
	total := n + len(twins)
	c := &collector{p: p, n: n, twins: twins, engine: engine, outputs: make([]float64, total*p.NumOutputs),
		seen: make([]bool, total), classOf: map[string]int{}}
	for i, l := range p.Classes {
		c.classOf[l] = i
	}
	if p.IsClassifier() {
		c.classes = make([]int, total)
	}
	return c
}

// add takes result row id: its outputs and, for a classifier, its label.
func (c *collector) add(id int64, vals []dbsql.NullFloat64, label dbsql.NullString) error {
	if id < 0 || id >= int64(len(c.seen)) || c.seen[id] {
		return fmt.Errorf("%s: result row number %d out of range or repeated", c.engine, id)
	}
	c.seen[id] = true
	k := c.p.NumOutputs
	for j, v := range vals {
		if !v.Valid {
			return fmt.Errorf("%s: row %d, output %d is NULL", c.engine, id, j)
		}
		c.outputs[int(id)*k+j] = v.Float64
	}
	if c.p.IsClassifier() {
		cl, ok := c.classOf[label.String]
		if !label.Valid || !ok {
			return fmt.Errorf("%s: row %d: class %q is not a class label", c.engine, id, label.String)
		}
		c.classes[id] = cl
	}
	return nil
}

// finish checks that every row came and that each NaN twin scored bit for
// bit as its row with NULL, and returns the rows' result.
func (c *collector) finish() (*Result, error) {
	for i, ok := range c.seen {
		if !ok {
			return nil, fmt.Errorf("%s: no result for row %d", c.engine, i)
		}
	}
	k := c.p.NumOutputs
	for t, r := range c.twins {
		e := c.n + t
		for j := 0; j < k; j++ {
			got, want := c.outputs[e*k+j], c.outputs[r*k+j]
			if math.Float64bits(got) != math.Float64bits(want) {
				return nil, fmt.Errorf("%s: row %d with NaN stored where it has NULL: output %d is %v, with NULL %v: a stored NaN must be missing", c.engine, r, j, got, want)
			}
		}
		if c.classes != nil && c.classes[e] != c.classes[r] {
			return nil, fmt.Errorf("%s: row %d with NaN stored where it has NULL: class %q, with NULL %q: a stored NaN must be missing",
				c.engine, r, c.p.Classes[c.classes[e]], c.p.Classes[c.classes[r]])
		}
	}
	res := &Result{Outputs: c.outputs[:c.n*k]}
	if c.classes != nil {
		res.Classes = c.classes[:c.n]
	}
	return res, nil
}

// shorten keeps engine messages that quote the whole statement readable.
func shorten(err error) error {
	s := err.Error()
	if len(s) > 2000 {
		return errors.New(s[:2000] + " …")
	}
	return err
}

// WithMaxNest returns the runner with every statement's CASE nesting held
// to n (sql.Options.MaxNest).
func (r sqlRunner) WithMaxNest(n int) Runner { r.maxNest = n; return r }

// WithMaxNest: see sqlRunner.WithMaxNest.
func (r sqliteRunner) WithMaxNest(n int) Runner { r.maxNest = n; return r }

// SQLRunner returns the runner for engine "sqlite", "duckdb" or
// "postgres" (for benchmarks and the command line).
func SQLRunner(engine string) (Runner, error) {
	switch engine {
	case "sqlite":
		return sqliteRunner{sqlRunner{engine: engine}}, nil
	case "duckdb", "postgres", "mysql":
		return sqlRunner{engine: engine}, nil
	}
	return nil, fmt.Errorf("unknown SQL engine %q\nhint: use sqlite, duckdb, postgres or mysql", engine)
}
