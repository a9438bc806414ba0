package verify

import (
	"context"
	dbsql "database/sql"
	"errors"
	"fmt"
	"math"
	"os"
	"strings"
	"sync/atomic"
	"time"

	"github.com/go-sql-driver/mysql" // database/sql driver "mysql"; MariaDB speaks its protocol

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// MySQLDSN is where the mysql runner connects when no Config names a
// server: $SAWMILL_MYSQL_DSN in the driver's form
// (user[:password]@tcp(host:port)/database; github.com/go-sql-driver/mysql).
// There is no default: "" leaves the runner skipped.
func MySQLDSN() string { return os.Getenv("SAWMILL_MYSQL_DSN") }

// errNoMySQL is the skip of a run with no server named.
var errNoMySQL = fmt.Errorf("%w: no MySQL/MariaDB server given (--mysql DSN or SAWMILL_MYSQL_DSN)", ErrSkip)

var mysqlRuns atomic.Int64

// mysqlName is a name unique to this process and call, for the tables
// and functions of runs that share one database.
func mysqlName(prefix string) string {
	return fmt.Sprintf("%s_%d_%d_%d", prefix, os.Getpid(), time.Now().UnixNano()%1e9, mysqlRuns.Add(1))
}

// openMySQL opens one connection to the server dsn names ("" for
// MySQLDSN()). The rows go into a TEMPORARY table, which only this
// connection sees and which the server drops when it closes, so parallel
// runs in one database do not collide and nothing is left behind. Every
// prepared statement is closed after use (load, run), and the statements
// are run with the query cache off for the session: a golden run prepares
// thousands of statements of up to megabytes.
func openMySQL(ctx context.Context, dsn string) (*sqlDB, error) {
	if dsn == "" {
		dsn = MySQLDSN()
	}
	if dsn == "" {
		return nil, errNoMySQL
	}
	cfg, err := mysql.ParseDSN(dsn)
	if err != nil {
		return nil, fmt.Errorf("mysql: DSN %q: %v\nhint: the form is user[:password]@tcp(host:port)/database", dsn, err)
	}
	cfg.MultiStatements = false
	cfg.InterpolateParams = false // bound parameters travel as binary doubles
	cfg.Timeout = 5 * time.Second
	shown := cfg.FormatDSN()
	if cfg.Passwd != "" {
		shown = strings.Replace(shown, ":"+cfg.Passwd+"@", ":xxxxx@", 1)
	}
	connector, err := mysql.NewConnector(cfg)
	if err != nil {
		return nil, err
	}
	db := dbsql.OpenDB(connector)
	db.SetMaxOpenConns(1)
	conn, err := db.Conn(ctx)
	if err == nil {
		err = conn.PingContext(ctx)
	}
	if err != nil {
		db.Close()
		return nil, fmt.Errorf("MySQL/MariaDB at %s: %v", shown, err)
	}
	// ANSI_QUOTES off (the statement's identifiers are in backquotes and
	// the runner's are quoted the same way), strict mode so a value out of
	// range is an error, never a silent clip.
	for _, s := range []string{"SET SESSION sql_mode = 'STRICT_ALL_TABLES,ERROR_FOR_DIVISION_BY_ZERO,NO_ENGINE_SUBSTITUTION'"} {
		if _, err := conn.ExecContext(ctx, s); err != nil {
			conn.Close()
			db.Close()
			return nil, fmt.Errorf("mysql: %s: %v", s, err)
		}
	}
	return &sqlDB{conn: conn, param: func(int) string { return "?" }, colType: "DOUBLE",
		quote: mysqlQuote, createTable: "CREATE TEMPORARY TABLE",
		close: func() { conn.Close(); db.Close() }}, nil
}

// mysqlQuote quotes an identifier in backquotes, a backquote inside
// doubled (MySQL 8.0 manual, 11.2 "Schema Object Names").
func mysqlQuote(s string) string { return "`" + strings.ReplaceAll(s, "`", "``") + "`" }

// mysqlError turns MariaDB's "DOUBLE value is out of range" (error 1690,
// where a sum passes the largest double: MySQL has no infinity, where the
// interpreter gives one) into a decline naming the reason.
func mysqlError(err error) error {
	var me *mysql.MySQLError
	if errors.As(err, &me) && me.Number == 1690 {
		return fmt.Errorf("%w: MySQL/MariaDB has no infinity and raises an error where the interpreter's value is infinite: %v", ErrDeclined, shorten(err))
	}
	return nil
}

// mysqlInfinities says how rows holding ±Inf in a used feature are
// loaded: a MySQL or MariaDB DOUBLE column cannot hold an infinity
// (measured on MariaDB 10.11: inserting one fails with error 1264, "Out of
// range value"). When every value the program compares a feature with
// (thresholds, the missing band, the zero band) is strictly inside
// ±MaxFloat64, and category codes are int32, ±Inf and ±MaxFloat64 take
// the same branch at every split, so the runner loads ±MaxFloat64 in their
// place (clamp true); otherwise the run is declined, naming the row. NaN is
// loaded as NULL, a missing value, as the interpreter takes it.
func mysqlInfinities(p *compile.Program, rows *forest.Rows) (clamp bool, err error) {
	bad := -1
	for r := 0; r < rows.Len() && bad < 0; r++ {
		x := rows.Row(r)
		for _, i := range p.UsedFeatures() {
			if math.IsInf(x[i], 0) {
				bad = r
				break
			}
		}
	}
	if bad < 0 {
		return false, nil
	}
	inside := func(v float64) bool { return math.Abs(v) < math.MaxFloat64 }
	ok := !p.HasMissingValue || inside(p.MissingLo) && inside(p.MissingHi)
	ok = ok && inside(p.ZeroBound)
	for ti := range p.Trees {
		for _, n := range p.Trees[ti].Nodes {
			if !n.IsLeaf() && !n.IsSetSplit() && !inside(n.Threshold) {
				ok = false
			}
		}
	}
	if !ok {
		return false, fmt.Errorf("%w: row %d holds an infinity, which a MySQL/MariaDB DOUBLE column cannot hold, and the model compares with ±MaxFloat64, so no finite stand-in takes the same branches", ErrDeclined, bad+1)
	}
	return true, nil
}

// mysqlFits fails, naming the setting, for a statement longer than the
// server's max_allowed_packet (16 MiB by default in MariaDB 10.11), which
// the server answers by closing the connection ("bad connection"): the
// 515,069-node forest of TestSQLBigForest is a statement of tens of MB.
// .ci/setup raises the limit to 1 GiB.
func mysqlFits(ctx context.Context, conn *dbsql.Conn, n int) error {
	var limit int64
	if err := conn.QueryRowContext(ctx, "SELECT @@max_allowed_packet").Scan(&limit); err != nil {
		return fmt.Errorf("mysql: max_allowed_packet: %v", err)
	}
	if int64(n) > limit-1024 {
		return fmt.Errorf("mysql: the statement is %d bytes, and the server's max_allowed_packet is %d\nhint: raise it (SET GLOBAL max_allowed_packet = 1073741824, or max_allowed_packet = 1G in the server's configuration)", n, limit)
	}
	return nil
}

// mysqlToolchain names the server's version.
func mysqlToolchain(ctx context.Context, conn *dbsql.Conn) string {
	var v string
	if conn.QueryRowContext(ctx, "SELECT VERSION()").Scan(&v) != nil {
		return ""
	}
	return "MySQL/MariaDB server " + v + " (github.com/go-sql-driver/mysql)"
}

// functionVariant is the variant that scores through the function form
// (sqltarget.Options.Function) in engines that have it.
const functionVariant = "function"

// scoreFunction runs p through the function form: it loads the rows as
// Score does, creates the functions, and reads SELECT row, f_0(...), ...
// FROM the table.
func (r sqlRunner) scoreFunction(ctx context.Context, p *compile.Program, layout string, rows *forest.Rows, dir string) (*Result, error) {
	if p.NumOutputs > sqltarget.MaxFunctionOutputs {
		return nil, fmt.Errorf("%w: the function form takes at most %d outputs, and the model has %d", ErrDeclined, sqltarget.MaxFunctionOutputs, p.NumOutputs)
	}
	rows, err := r.loadable(p, rows)
	if err != nil {
		return nil, err
	}
	db, err := r.open(ctx, "")
	if err != nil {
		return nil, err
	}
	defer db.close()
	o, err := r.options(p, layout, "", db.schema)
	if err != nil {
		return nil, err
	}
	if r.engine == "mysql" {
		o.Table = mysqlName("sawmill_rows")
	}
	fo := o
	fo.Keep = nil
	fo.Function = "sawmill_score"
	if r.engine == "mysql" {
		fo.Function = mysqlName("sawmill_fn") // functions are global to the database
	}
	stmts, err := sqltarget.FunctionStatements(p, fo)
	if err != nil {
		return nil, err
	}
	if dir != "" {
		files, err := sqltarget.Emit(p, fo)
		if err != nil {
			return nil, err
		}
		if err := os.WriteFile(dir+"/"+files[0].Name, files[0].Data, 0o644); err != nil {
			return nil, err
		}
	}
	if err := db.load(ctx, p, o, rows); err != nil {
		return nil, fmt.Errorf("%s: %v", r.engine, err)
	}
	names := sqltarget.FunctionNames(p, fo.Function)
	if r.engine == "mysql" {
		defer func() {
			for _, n := range names {
				db.conn.ExecContext(context.Background(), "DROP FUNCTION IF EXISTS "+mysqlQuote(n))
			}
		}()
	}
	start := time.Now()
	for _, s := range stmts {
		if r.engine == "mysql" {
			if err := mysqlFits(ctx, db.conn, len(s)); err != nil {
				return nil, err
			}
		}
		if _, err := db.conn.ExecContext(ctx, s); err != nil {
			return nil, fmt.Errorf("%s: create function: %v", r.engine, shorten(err))
		}
	}
	created := time.Since(start)
	res, err := db.run(ctx, p, r.functionQuery(p, o, fo, names, db.quoteFn()), rows.Len(), 0, r.engine)
	if err != nil {
		return nil, err
	}
	res.Build += created
	return res, nil
}

// functionQuery is the SELECT that calls every function on the loaded
// table: the row number, then one call per result column, NULL for the
// arguments of features the model does not use (the table has no column
// for them).
func (r sqlRunner) functionQuery(p *compile.Program, o, fo sqltarget.Options, names []string, quote func(string) string) string {
	used := map[int]bool{}
	for _, i := range p.UsedFeatures() {
		used[i] = true
	}
	args := make([]string, len(p.Features))
	for i, f := range p.Features {
		name := f.Name
		if o.Columns != nil {
			name = o.Columns[i]
		}
		args[i] = "NULL"
		if used[i] {
			args[i] = quote(name)
		}
	}
	call := "(" + strings.Join(args, ", ") + ")"
	items := []string{quote(o.Keep[0])}
	for _, n := range names {
		f := quote(n)
		if o.Schema != "" {
			f = quote(o.Schema) + "." + f
		}
		items = append(items, f+call)
	}
	ref := quote(o.Table)
	if o.Schema != "" {
		ref = quote(o.Schema) + "." + ref
	}
	return "SELECT " + strings.Join(items, ", ") + " FROM " + ref
}

// loadable returns the rows as the engine can hold them: for MySQL, ±Inf
// as ±MaxFloat64 where that takes the same branches, else the decline
// mysqlInfinities gives; other engines take the rows as they are.
func (r sqlRunner) loadable(p *compile.Program, rows *forest.Rows) (*forest.Rows, error) {
	if r.engine != "mysql" {
		return rows, nil
	}
	clamp, err := mysqlInfinities(p, rows)
	if err != nil || !clamp {
		return rows, err
	}
	return clampInfinities(rows), nil
}

// clampInfinities is a copy of rows with ±Inf replaced by ±MaxFloat64
// (see mysqlInfinities).
func clampInfinities(rows *forest.Rows) *forest.Rows {
	c := *rows
	c.Values = make([]float64, len(rows.Values))
	for i, v := range rows.Values {
		if math.IsInf(v, 0) {
			v = math.Copysign(math.MaxFloat64, v)
		}
		c.Values[i] = v
	}
	return &c
}
