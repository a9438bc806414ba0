package verify

import (
	"context"
	dbsql "database/sql"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// loadValues creates table r32 (i, x) in db's session and loads xs, bound
// as float64 parameters. It returns the table's name.
func loadValues(t *testing.T, db *sqlDB, xs []float64) string {
	t.Helper()
	ctx := context.Background()
	table := "r32"
	if db.schema != "" {
		table = db.schema + ".r32"
	}
	if _, err := db.conn.ExecContext(ctx, "CREATE TABLE "+table+" (i INTEGER, x "+db.colType+")"); err != nil {
		t.Fatal(err)
	}
	if db.appendRows != nil {
		err := db.appendRows(ctx, db.schema, "r32", func(add func(...any) error) error {
			for i, x := range xs {
				if err := add(int64(i), x); err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		return table
	}
	tx, err := db.conn.BeginTx(ctx, nil)
	if err != nil {
		t.Fatal(err)
	}
	const per = 500
	for a := 0; a < len(xs); a += per {
		b := min(a+per, len(xs))
		var q strings.Builder
		q.WriteString("INSERT INTO " + table + " (i, x) VALUES ")
		var args []any
		for i := a; i < b; i++ {
			if i > a {
				q.WriteString(", ")
			}
			fmt.Fprintf(&q, "(%s, %s)", db.param(len(args)), db.param(len(args)+1))
			args = append(args, int64(i), xs[i])
		}
		if _, err := tx.ExecContext(ctx, q.String(), args...); err != nil {
			t.Fatal(err)
		}
	}
	if err := tx.Commit(); err != nil {
		t.Fatal(err)
	}
	return table
}

// round32Sample is the edges of float32 rounding (ties each way, binade
// and subnormal edges, the overflow edge, signed zeros) and n random
// doubles: exponents across float32's range, random ties, neighbours of
// random float32 values.
func round32Sample(n int) []float64 {
	var xs []float64
	for _, f := range []float32{1, 1.5, 3, 0.1, 16777216, math.MaxFloat32, math.SmallestNonzeroFloat32, 0x1p-126, 0x1.fffffcp-127, 7, 0x1p127} {
		for _, g := range []float32{f, math.Nextafter32(f, 0)} {
			a, b := float64(g), float64(math.Nextafter32(g, float32(math.Inf(1))))
			if math.IsInf(b, 0) {
				b = 0x1p128
			}
			mid := a + (b-a)/2
			for _, x := range []float64{a, mid, math.Nextafter(mid, 0), math.Nextafter(mid, math.Inf(1))} {
				xs = append(xs, x, -x)
			}
		}
	}
	xs = append(xs, 0, math.Copysign(0, -1), 0x1.ffffffp127, math.Nextafter(0x1.ffffffp127, 0), 0x1p-150, math.Nextafter(0x1p-150, 1), 5e-324, 1e300, -1e300)
	rng := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < n; i++ {
		switch i % 3 {
		case 0:
			xs = append(xs, math.Ldexp(1+rng.Float64(), rng.IntN(300)-170)*float64(1-2*rng.IntN(2)))
		case 1:
			m := float64(rng.Int64N(1<<24)<<1 | 1)
			xs = append(xs, math.Ldexp(m, rng.IntN(300)-175)*float64(1-2*rng.IntN(2)))
		case 2:
			f := math.Float32frombits(rng.Uint32()&^(0xff<<23) | uint32(rng.IntN(254)+1)<<23)
			xs = append(xs, math.Nextafter(float64(f), math.Inf(2*rng.IntN(2)-1)))
		}
	}
	return xs
}

// TestSQLRound32 runs the round32 expression that float32 models use in
// SQL (emit/sqltarget's r32) in every engine, in the engine's own dialect and in
// ANSI text, over the edges of float32 rounding and random doubles (a
// million in SQLite, 100,000 in the others), and holds each result to Go's
// float32 conversion bit for bit (IEEE 754 round to nearest, ties to even;
// overflow to ±Inf; subnormals; −0 kept).
func TestSQLRound32(t *testing.T) {
	for _, r := range sqlEngineRunners {
		for _, variant := range []string{"", "ansi"} {
			t.Run(r.engine+"/"+variant, func(t *testing.T) {
				n := 100_000
				if r.engine == "sqlite" && variant == "" {
					n = 1_000_000
				}
				if testing.Short() {
					n /= 10
				}
				db := sqlSession(t, r)
				xs := round32Sample(n)
				if r.engine == "sqlite" {
					// SQLite stores -0 in a REAL column as the integer 0;
					// TestRound32 in emit/sqltarget covers -0.
					xs = slices.DeleteFunc(xs, func(x float64) bool { return x == 0 && math.Signbit(x) })
				}
				table := loadValues(t, db, xs)
				q := "SELECT i, " + sqltarget.Round32SQL(r.dialect(variant), "x") + " FROM " + table
				rows, err := db.conn.QueryContext(context.Background(), q)
				if err != nil {
					t.Fatalf("%v\n%s", err, q)
				}
				eachResult(t, rows, len(xs), func(i int64, got float64) {
					x := xs[i]
					want := float64(float32(x))
					if math.Float64bits(got) != math.Float64bits(want) {
						t.Fatalf("round32(%v = %#x) = %v, float32 gives %v\n%s", x, math.Float64bits(x), got, want, q)
					}
				})
			})
		}
	}
}

// TestFloat32Engines checks that PostgreSQL's real and DuckDB's FLOAT add
// in single precision, which float32 models' running sums there rely on:
// 2^24 + 1 is 2^24 in float32 (ties to even), 2^24 + 1 in double; and
// 0.1f + 0.2f is float32's sum.
func TestFloat32Engines(t *testing.T) {
	for _, r := range sqlEngineRunners {
		real := map[string]string{"postgres": "real", "duckdb": "FLOAT"}[r.engine]
		if real == "" {
			continue
		}
		t.Run(r.engine, func(t *testing.T) {
			db := sqlSession(t, r)
			a, b := float32(0.1), float32(0.2)
			for _, c := range []struct {
				x, y float32
			}{{16777216, 1}, {a, b}, {1e38, 3e38}, {0x1p-149, 0x1p-149}} {
				q := fmt.Sprintf("SELECT CAST(CAST(%s AS %s) + CAST(%s AS %s) AS DOUBLE PRECISION)",
					sqltarget.Postgres.Literal(float64(c.x)), real, sqltarget.Postgres.Literal(float64(c.y)), real)
				if r.engine == "duckdb" {
					q = fmt.Sprintf("SELECT CAST(CAST(%s AS FLOAT) + CAST(%s AS FLOAT) AS DOUBLE)",
						sqltarget.DuckDB.Literal(float64(c.x)), sqltarget.DuckDB.Literal(float64(c.y)))
				}
				var got float64
				err := db.conn.QueryRowContext(context.Background(), q).Scan(&got)
				want := float64(c.x + c.y)
				if math.IsInf(want, 0) {
					// PostgreSQL raises "value out of range: overflow"; a
					// float32 model's sums that overflow fail there rather
					// than give infinity.
					if err == nil && got != want {
						t.Fatalf("%s: %v, want %v or an error", q, got, want)
					}
					t.Logf("%s: overflow: %v, %v", q, got, err)
					continue
				}
				if err != nil {
					t.Fatalf("%s: %v", q, err)
				}
				if math.Float64bits(got) != math.Float64bits(want) {
					t.Fatalf("%s = %v, float32 gives %v", q, got, want)
				}
			}
		})
	}
}

// TestSQLSetSplit5000 scores a split of 5,000 categories (every third
// integer, and 2^31-1) under each category rule in every engine and
// dialect, on values at, just below and just above members and
// non-members, negative ones, −0 and huge ones, and holds the result to
// the interpreter's rule (forest.CategoryMatch); it logs the time to
// prepare the statement.
func TestSQLSetSplit5000(t *testing.T) {
	cats := make([]int32, 0, 5000)
	for c := int32(0); len(cats) < 4999; c += 3 {
		cats = append(cats, c)
	}
	cats = append(cats, math.MaxInt32)
	var xs []float64
	for _, c := range []float64{0, 1, 3, 4, 6, 300, 14994, 14995, 2147483647, 2147483648} {
		for _, x := range []float64{c, math.Nextafter(c, -1), math.Nextafter(c, 1e300), c + 0.5, -c, -c - 0.5} {
			xs = append(xs, x)
		}
	}
	xs = append(xs, -0.5, -1, -0.999, 1e300, -1e300, 0x1p-1074)
	for _, m := range []forest.CategoryMatch{forest.MatchFloor, forest.MatchTruncate, forest.MatchExact} {
		p := &compile.Program{Task: forest.Regression, Features: []compile.Feature{{Name: "x", Used: true}},
			NumOutputs: 1, Combine: forest.Sum, BaseScore: []float64{0}, Compare: compile.Double, CategoryMatch: m,
			Hash: "test", Trees: []compile.Tree{{Nodes: []compile.Node{
				{Feature: 0, Categories: cats, Left: 1, Right: 2},
				{Feature: -1, Left: -1, Right: -1, Value: []float64{1}, ID: 1},
				{Feature: -1, Left: -1, Right: -1, Value: []float64{2}, ID: 2},
			}}}}
		for _, r := range sqlEngineRunners {
			for _, variant := range []string{"", "ansi"} {
				t.Run(fmt.Sprintf("%s/%s/%s", m, r.engine, variant), func(t *testing.T) {
					db := sqlSession(t, r)
					loadValues(t, db, xs)
					files, err := sqltarget.Emit(p, sqltarget.Options{Dialect: r.dialect(variant), Table: "r32", Schema: db.schema, Keep: []string{"i"}})
					if err != nil {
						t.Fatal(err)
					}
					ctx := context.Background()
					start := time.Now()
					stmt, err := db.conn.PrepareContext(ctx, string(files[0].Data))
					if err != nil {
						t.Fatal(err)
					}
					defer stmt.Close()
					t.Logf("prepared in %v", time.Since(start))
					rows, err := stmt.QueryContext(ctx)
					if err != nil {
						t.Fatal(err)
					}
					eachResult(t, rows, len(xs), func(i int64, got float64) {
						x := xs[i]
						if r.engine == "sqlite" && x == 0 {
							x = 0 // SQLite stores -0 as 0
						}
						want := 2.0
						if m.IsMember(x, cats) {
							want = 1
						}
						if got != want {
							t.Fatalf("x = %v: leaf %v, want %v", x, got, want)
						}
					})
				})
			}
		}
	}
}

// eachResult reads result rows (i, value), passes each to check, and
// fails unless exactly n came.
func eachResult(t *testing.T, rows *dbsql.Rows, n int, check func(i int64, got float64)) {
	t.Helper()
	defer rows.Close()
	seen := 0
	for rows.Next() {
		var i int64
		var got float64
		if err := rows.Scan(&i, &got); err != nil {
			t.Fatal(err)
		}
		check(i, got)
		seen++
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	if seen != n {
		t.Fatalf("%d results for %d values", seen, n)
	}
}
