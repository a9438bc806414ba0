package sqltarget

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"github.com/go-sql-driver/mysql"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// mysqlConn opens one connection to the server $SAWMILL_MYSQL_DSN names
// (CI: MariaDB 10.11 from Debian's packages, started by .ci/setup),
// skipping the test where none is named, unless SAWMILL_REQUIRE_ENGINES is
// set.
func mysqlConn(t *testing.T) *sql.Conn {
	t.Helper()
	dsn := os.Getenv("SAWMILL_MYSQL_DSN")
	if dsn == "" {
		testenv.Need(t, errors.New("no MySQL/MariaDB server given (SAWMILL_MYSQL_DSN)"))
	}
	db, err := sql.Open("mysql", dsn)
	require.NoError(t, err)
	db.SetMaxOpenConns(1)
	conn, err := db.Conn(context.Background())
	require.NoError(t, err, "MySQL/MariaDB at %s", dsn)
	t.Cleanup(func() { conn.Close(); db.Close() })
	return conn
}

// mysqlScalar reads one double through a prepared statement, so it comes
// back in the binary protocol as the server's 8 bytes, not as text.
func mysqlScalar(conn *sql.Conn, q string) (float64, error) {
	st, err := conn.PrepareContext(context.Background(), q)
	if err != nil {
		return 0, err
	}
	defer st.Close()
	var v float64
	err = st.QueryRowContext(context.Background()).Scan(&v)
	return v, err
}

// TestMySQLFacts holds the engine facts mysql text relies on, measured on
// MariaDB 10.11 (Debian's 10.11.19; MySQL itself is not run here):
// exponent literals read back as the same double, bit for bit; a literal
// without an exponent is DECIMAL, one with is DOUBLE; -0 comes back +0;
// EXP raises an error on overflow and gives 0 on underflow; a DOUBLE column
// holds no infinity.
func TestMySQLFacts(t *testing.T) {
	conn := mysqlConn(t)
	ctx := context.Background()
	rng := rand.New(rand.NewPCG(13, 211))
	probes := []float64{0.1, 1.0 / 3, math.MaxFloat64, -math.MaxFloat64, math.SmallestNonzeroFloat64, 0x1p-1022,
		0x1p-1022 - 0x1p-1074, 1e308, 5e-324, 0.5, 2.5, 1e23, 9007199254740993, 1 - 0x1p-53, 123456789.123456789}
	for len(probes) < 211 {
		v := math.Float64frombits(rng.Uint64())
		if !math.IsNaN(v) && !math.IsInf(v, 0) {
			probes = append(probes, v)
		}
	}
	for _, v := range probes {
		got, err := mysqlScalar(conn, "SELECT "+MySQL.Literal(v))
		require.NoError(t, err, "literal %s", MySQL.Literal(v))
		require.Equal(t, math.Float64bits(v), math.Float64bits(got), "literal %s read back as %v", MySQL.Literal(v), got)
	}
	negZero, err := mysqlScalar(conn, "SELECT "+MySQL.Literal(math.Copysign(0, -1))+" * "+MySQL.Literal(1))
	require.NoError(t, err)
	require.True(t, negZero == 0 && !math.Signbit(negZero), "-0 came back %v with its sign: the runner's ±0 rule (verify) can go", negZero)

	table := fmt.Sprintf("sawmill_facts_%d", os.Getpid())
	_, err = conn.ExecContext(ctx, "CREATE TEMPORARY TABLE "+table+" AS SELECT 0.1 AS d, 1e-1 AS e")
	require.NoError(t, err)
	cols, err := conn.QueryContext(ctx, "SHOW COLUMNS FROM "+table)
	require.NoError(t, err)
	types := map[string]string{}
	for cols.Next() {
		var field, typ string
		var rest [4]sql.RawBytes
		require.NoError(t, cols.Scan(&field, &typ, &rest[0], &rest[1], &rest[2], &rest[3]))
		types[field] = strings.ToLower(typ)
	}
	require.NoError(t, cols.Close())
	require.Equal(t, map[string]string{"d": "decimal(2,1)", "e": "double"}, types)
	_, err = conn.ExecContext(ctx, "DROP TEMPORARY TABLE "+table)
	require.NoError(t, err)

	_, err = mysqlScalar(conn, "SELECT EXP(1000e0)")
	var me *mysql.MySQLError
	require.True(t, errors.As(err, &me) && me.Number == 1690, "EXP(1000): %v, want error 1690 (DOUBLE value is out of range)", err)
	v, err := mysqlScalar(conn, "SELECT EXP(-1000e0)")
	require.NoError(t, err)
	require.Equal(t, 0.0, v)
	v, err = mysqlScalar(conn, "SELECT EXP("+MySQL.Literal(expMax)+")")
	require.NoError(t, err, "EXP(expMax)")
	require.False(t, math.IsInf(v, 0))

	_, err = conn.ExecContext(ctx, "CREATE TEMPORARY TABLE "+table+" (x DOUBLE)")
	require.NoError(t, err)
	for _, bad := range []float64{math.Inf(1), math.Inf(-1), math.NaN()} {
		_, err = conn.ExecContext(ctx, "INSERT INTO "+table+" VALUES (?)", bad)
		require.Error(t, err, "a DOUBLE column took %v", bad)
	}
}

// TestMySQLLimits finds by bisection the deepest CASE nesting of the worst
// chain (worstChain, nested layout) that MariaDB runs in mysql text as a
// query, and holds DefaultMaxNest to at most half of it: measured on
// MariaDB 10.11.19 with the default thread_stack of 299,008 bytes, 538;
// one level deeper fails with error 1436, "Thread stack overrun".
//
// The function form is run at twice DefaultMaxNest only: a stored function
// nested too deep can crash the server (measured once by hand: CASE 540 to
// 3,000 deep in a function's SET fails at the call with error 1436, but
// CREATE FUNCTION of one 4,000 deep took mariadbd down, and it restarted),
// and the tests share one server. checkFunction holds the mysql function
// form to mysqlFunctionMaxNest.
func TestMySQLLimits(t *testing.T) {
	conn := mysqlConn(t)
	ctx := context.Background()
	table := fmt.Sprintf("sawmill_limits_%d", os.Getpid())
	_, err := conn.ExecContext(ctx, "CREATE TEMPORARY TABLE "+table+" (x DOUBLE)")
	require.NoError(t, err)
	_, err = conn.ExecContext(ctx, "INSERT INTO "+table+" VALUES (1e6), (NULL)")
	require.NoError(t, err)
	limit := mysqlLimit(t, conn, table, false, 4000)
	t.Logf("MariaDB runs CASE nested %d deep in a query, fails at %d", limit, limit+1)
	require.GreaterOrEqual(t, limit, 2*DefaultMaxNest[MySQL], "DefaultMaxNest[MySQL] leaves less than half the measured depth")
	require.Equal(t, 2*DefaultMaxNest[MySQL], mysqlLimit(t, conn, table, true, 2*DefaultMaxNest[MySQL]), "the function form fails at twice DefaultMaxNest")
}

// mysqlLimit bisects the deepest worst chain that runs, up to top (top
// itself when it runs).
func mysqlLimit(t *testing.T, conn *sql.Conn, table string, function bool, top int) int {
	ctx := context.Background()
	fn := fmt.Sprintf("sawmill_limit_%d", os.Getpid())
	runs := func(depth int) (bool, string) {
		p := worstChain(t, depth)
		o := Options{Dialect: MySQL, Table: table, Layout: emit.Nested, MaxNest: depth}
		q := ""
		if function {
			o.Function = fn
			stmts, err := FunctionStatements(p, o)
			require.NoError(t, err)
			for _, s := range stmts {
				if _, err := conn.ExecContext(ctx, s); err != nil {
					return false, err.Error()
				}
			}
			defer conn.ExecContext(ctx, "DROP FUNCTION IF EXISTS "+fn)
			q = "SELECT " + fn + "(x) FROM " + table
		} else {
			files, err := Emit(p, o)
			require.NoError(t, err)
			q = string(files[0].Data)
		}
		rows, err := conn.QueryContext(ctx, q)
		if err != nil {
			return false, err.Error()
		}
		for rows.Next() {
		}
		err = rows.Err()
		rows.Close()
		if err != nil {
			return false, err.Error()
		}
		return true, ""
	}
	lo, hi := 2, top // runs at lo, fails at hi
	ok, msg := runs(hi)
	if ok {
		return hi
	}
	t.Logf("at %d: %s", hi, msg[:min(len(msg), 200)])
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		if ok, _ := runs(mid); ok {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo
}
