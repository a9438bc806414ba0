package golden

import (
	"context"
	dbsql "database/sql"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"
	"time"

	_ "github.com/jackc/pgx/v5/stdlib" // database/sql driver "pgx"
	_ "modernc.org/sqlite"             // database/sql driver "sqlite", pure Go

	"sawmill/compile"
	"sawmill/emit"
	sqlemit "sawmill/emit/sql"
	"sawmill/forest"
)

// sqlRunner runs emitted SQL in a real engine: it creates a table with one
// double column per used feature (NULL for a missing value) plus a row
// number, loads the rows through bound float64 parameters (never text),
// runs the statement and reads every output back as float64.
//
// Variants: "" is the engine's own dialect; "ansi" runs the portable ANSI
// text on the same engine.
type sqlRunner struct {
	engine string // "sqlite", "duckdb" or "postgres"
}

// sqliteRunner is the SQLite runner; it also keeps snapshots of the emitted
// text (the other engines' text differs only in literal spelling).
type sqliteRunner struct{ sqlRunner }

func (r sqlRunner) Name() string { return r.engine }

func (sqlRunner) Layouts() []string { return []string{emit.Nested, emit.Table} }

func (sqlRunner) Variants() []string { return []string{"", "ansi"} }

func (sqlRunner) CompileOptions(string) compile.Options { return compile.Options{} }

// Tolerance: sums, divisions and comparisons are IEEE double operations in
// the same order as the interpreter's, so a model without a transform must
// match bit for bit. EXP is the engine's C library exp, which differs from
// Go's math.Exp by one ulp on about 14% of arguments (measured in
// TestSQLExp), so logistic and softmax outputs are held within
// (k+4)·2^-52 for k outputs: each exp contributes at most one ulp
// (2^-53 relative), the softmax sum adds at most k of them, and outputs are
// at most 1.
func (sqlRunner) Tolerance(_ string, p *compile.Program) (bool, float64) {
	if p.Transform == forest.NoTransform {
		return true, 0
	}
	return false, float64(p.NumOutputs+4) * 0x1p-52
}

func (r sqlRunner) dialect(variant string) sqlemit.Dialect {
	if variant == "ansi" {
		return sqlemit.ANSI
	}
	return map[string]sqlemit.Dialect{"sqlite": sqlemit.SQLite, "duckdb": sqlemit.DuckDB, "postgres": sqlemit.Postgres}[r.engine]
}

// sqlTable is the table the runners create; its name needs quoting.
const sqlTable = `rows "in" 'test'`

// options are the emit options a runner uses for p: the table, the row
// number kept, and, when the model's names cannot be SQL identifiers in
// this dialect, column names made from them.
func (r sqlRunner) options(p *compile.Program, layout, variant, schema string) (sqlemit.Options, error) {
	o := sqlemit.Options{Dialect: r.dialect(variant), Table: sqlTable, Schema: schema, Layout: layout}
	o.Keep = []string{rowColumn(p)}
	// The engine's own rules for names hold whatever dialect the text is
	// written in (ANSI text run on PostgreSQL still has its identifiers
	// cut to 63 bytes), so names are checked under both.
	check := o
	check.Dialect = r.dialect("")
	_, err := sqlemit.Layout(p, o) // Emit's checks, without writing the statement
	if err == nil && check.Dialect != o.Dialect {
		_, err = sqlemit.Layout(p, check)
	}
	if errors.Is(err, sqlemit.ErrNames) {
		o.Columns = make([]string, len(p.Features))
		for i, f := range p.Features {
			o.Columns[i] = "c" + strconv.Itoa(i) + " " + strings.ReplaceAll(f.Name, "\x00", "")
		}
		for j, n := range sqlemit.OutputNames(p) {
			o.Outputs = append(o.Outputs, "o"+strconv.Itoa(j)+" "+strings.ReplaceAll(n, "\x00", ""))
		}
		// What renaming cannot mend (a class label with a NUL byte, which
		// the class column must spell) is beyond SQL.
		if _, err := sqlemit.Layout(p, o); errors.Is(err, sqlemit.ErrNames) {
			return o, fmt.Errorf("%w: %v", ErrDeclined, err)
		}
	} else if err != nil {
		return o, declined(err)
	}
	return o, nil
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
	o, err := r.options(p, layout, variant, "")
	if err != nil {
		return nil, err
	}
	return sqlemit.Emit(p, o)
}

// sqlDB is an open engine session for one Score.
type sqlDB struct {
	conn    *dbsql.Conn
	schema  string // PostgreSQL: the fresh schema holding the table
	param   func(i int) string
	colType string
	close   func()
	// appendRows, when set, loads rows faster than INSERT (DuckDB's
	// appender): table and columns are plain names, row values float64 or
	// nil.
	appendRows func(ctx context.Context, schema, table string, rows func(add func(vals ...any) error) error) error
}

func (r sqlRunner) open(ctx context.Context) (*sqlDB, error) {
	switch r.engine {
	case "sqlite":
		db, err := dbsql.Open("sqlite", ":memory:")
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
		return openPostgres(ctx)
	}
	panic("BUG: unknown SQL engine " + r.engine)
}

// PostgresDSN is where the postgres runner connects: $SAWMILL_POSTGRES_DSN,
// else a local server with trust authentication.
func PostgresDSN() (dsn string, fromEnv bool) {
	if s := os.Getenv("SAWMILL_POSTGRES_DSN"); s != "" {
		return s, true
	}
	return "postgres://postgres@127.0.0.1:5432/test?sslmode=disable&connect_timeout=5", false
}

var pgSchemas atomic.Int64

func openPostgres(ctx context.Context) (*sqlDB, error) {
	dsn, fromEnv := PostgresDSN()
	db, err := dbsql.Open("pgx", dsn)
	if err != nil {
		return nil, err
	}
	fail := func(err error) (*sqlDB, error) {
		db.Close()
		if !fromEnv {
			return nil, fmt.Errorf("%w: no PostgreSQL server answers at the default %s (%v); set SAWMILL_POSTGRES_DSN", ErrSkip, dsn, err)
		}
		return nil, fmt.Errorf("PostgreSQL at SAWMILL_POSTGRES_DSN: %v", err)
	}
	pctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	if err := db.PingContext(pctx); err != nil {
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
	return &sqlDB{conn: conn, schema: schema, param: func(i int) string { return "$" + strconv.Itoa(i+1) }, colType: "double precision",
		close: func() {
			conn.ExecContext(context.Background(), "DROP SCHEMA "+schema+" CASCADE")
			conn.Close()
			db.Close()
		}}, nil
}

func quoteIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// load creates the table and inserts every row, NULL for NaN.
func (db *sqlDB) load(ctx context.Context, p *compile.Program, o sqlemit.Options, rows *forest.Rows) error {
	ref := quoteIdent(o.Table)
	if o.Schema != "" {
		ref = quoteIdent(o.Schema) + "." + ref
	}
	used := p.UsedFeatures()
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
	if _, err := db.conn.ExecContext(ctx, "CREATE TABLE "+ref+" ("+strings.Join(defs, ", ")+")"); err != nil {
		return fmt.Errorf("create table: %v", err)
	}
	if db.appendRows != nil {
		return db.appendRows(ctx, o.Schema, o.Table, func(add func(vals ...any) error) error {
			vals := make([]any, len(cols))
			for r := 0; r < rows.Len(); r++ {
				vals[0] = int64(r)
				x := rows.Row(r)
				for k, i := range used {
					if math.IsNaN(x[i]) {
						vals[k+1] = nil
					} else {
						vals[k+1] = x[i]
					}
				}
				if err := add(vals...); err != nil {
					return fmt.Errorf("append row %d: %v", r, err)
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
	for a := 0; a < rows.Len(); a += per {
		b := min(a+per, rows.Len())
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
		for r := a; r < b; r++ {
			args = append(args, int64(r))
			x := rows.Row(r)
			for _, i := range used {
				if math.IsNaN(x[i]) {
					args = append(args, nil)
				} else {
					args = append(args, x[i])
				}
			}
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
	return r.score(ctx, p, rows, dir, func(schema string) (sqlemit.Options, error) {
		return r.options(p, layout, variant, schema)
	})
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

// declines returns ErrDeclined for statements beyond those counts.
func (r sqlRunner) declines(p *compile.Program, layout, variant string) error {
	n, err := sqlemit.Stages(p, sqlemit.Options{Dialect: r.dialect(variant), Layout: layout})
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
func (r sqlRunner) score(ctx context.Context, p *compile.Program, rows *forest.Rows, dir string, opts func(schema string) (sqlemit.Options, error)) (*Result, error) {
	db, err := r.open(ctx)
	if err != nil {
		return nil, err
	}
	defer db.close()
	o, err := opts(db.schema)
	if err != nil {
		return nil, err
	}
	files, err := sqlemit.Emit(p, o)
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
	if o.View != "" { // create the view, then read it
		if _, err := db.conn.ExecContext(ctx, text); err != nil {
			return nil, fmt.Errorf("%s: create view: %v", r.engine, shorten(err))
		}
		text = "SELECT * FROM " + quoteIdent(o.View)
		if o.Schema != "" {
			text = "SELECT * FROM " + quoteIdent(o.Schema) + "." + quoteIdent(o.View)
		}
	}
	return db.run(ctx, p, text, rows.Len(), len(o.Keep)-1, r.engine)
}

// run prepares and runs the statement and reads the result. Build is the
// prepare time, Run the execution and reading.
func (db *sqlDB) run(ctx context.Context, p *compile.Program, text string, n, extraKeep int, engine string) (*Result, error) {
	res := &Result{Outputs: make([]float64, n*p.NumOutputs)}
	start := time.Now()
	stmt, err := db.conn.PrepareContext(ctx, text)
	if err != nil {
		return nil, fmt.Errorf("%s: prepare: %v", engine, shorten(err))
	}
	defer stmt.Close()
	res.Build = time.Since(start)
	start = time.Now()
	q, err := stmt.QueryContext(ctx)
	if err != nil {
		return nil, fmt.Errorf("%s: run: %v", engine, shorten(err))
	}
	defer q.Close()
	k := p.NumOutputs
	classOf := map[string]int{}
	for i, c := range p.Classes {
		classOf[c] = i
	}
	if p.IsClassifier() {
		res.Classes = make([]int, n)
	}
	var id int64
	vals := make([]dbsql.NullFloat64, k)
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
	seen := make([]bool, n)
	for q.Next() {
		if err := q.Scan(dest...); err != nil {
			return nil, fmt.Errorf("%s: read result: %v", engine, err)
		}
		if id < 0 || id >= int64(n) || seen[id] {
			return nil, fmt.Errorf("%s: result row number %d out of range or repeated", engine, id)
		}
		seen[id] = true
		for j, v := range vals {
			if !v.Valid {
				return nil, fmt.Errorf("%s: row %d, output %d is NULL", engine, id, j)
			}
			res.Outputs[int(id)*k+j] = v.Float64
		}
		if p.IsClassifier() {
			c, ok := classOf[label.String]
			if !label.Valid || !ok {
				return nil, fmt.Errorf("%s: row %d: class %q is not a class label", engine, id, label.String)
			}
			res.Classes[id] = c
		}
	}
	if err := q.Err(); err != nil {
		return nil, fmt.Errorf("%s: run: %v", engine, shorten(err))
	}
	for i, ok := range seen {
		if !ok {
			return nil, fmt.Errorf("%s: no result for row %d", engine, i)
		}
	}
	res.Run = time.Since(start)
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

// SQLRunner returns the runner for engine "sqlite", "duckdb" or
// "postgres" (for benchmarks and the command line).
func SQLRunner(engine string) (Runner, error) {
	switch engine {
	case "sqlite":
		return sqliteRunner{sqlRunner{engine}}, nil
	case "duckdb", "postgres":
		return sqlRunner{engine}, nil
	}
	return nil, fmt.Errorf("unknown SQL engine %q\nhint: use sqlite, duckdb or postgres", engine)
}
