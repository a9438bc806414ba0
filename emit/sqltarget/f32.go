package sqltarget

import (
	"fmt"
	"math"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
)

// Float32 arithmetic in SQL.
//
// PostgreSQL's real and DuckDB's FLOAT are IEEE 754 binary32 and add in
// single precision (measured: in PostgreSQL 15 16777216::real + 1::real is
// 16777216; TestFloat32Engines holds both engines to it), so a float32
// model's running sums are real (FLOAT) columns there. SQLite has no 4-byte
// float, and ANSI text runs on SQLite too, so there every float32 operation
// is the double operation followed by round32 written in double arithmetic
// (r32). That is exact: the double result of an addition, multiplication
// or division of two float32 values, rounded to float32, is the float32
// result, since 53 >= 2·24 + 2 (S. A. Figueroa, "When is double rounding
// innocuous?", SIGNUM Newsletter 30(3), 1995). The transforms are written
// the same way in every dialect, one rounding a step.

// Bounds of round32 (exact float64 values).
const (
	// f32Overflow is the smallest double that rounds to infinity in
	// float32: halfway between the largest float32 and 2^128, which ties to
	// the even 2^128.
	f32Overflow = 0x1.ffffffp127
	// f32MinNormal is the smallest normal float32, 2^-126.
	f32MinNormal = 0x1p-126
	// f32Half is half the smallest subnormal float32: a double of at most
	// this magnitude rounds to a zero.
	f32Half = 0x1p-150
)

// Veltkamp's splitting constants: c = x·K, hi = c − (c − x) is x rounded to
// nearest with 53 − s significant bits for K = 2^s + 1 (T. J. Dekker, "A
// floating-point technique for extending the available precision",
// Numer. Math. 18, 1971; S. Boldo, "Pitfalls of a full floating-point proof:
// example on the formal proof of the Veltkamp/Dekker algorithms", IJCAR
// 2006, which shows that a tie may go either way).
const (
	veltkamp24 = 1<<29 + 1 // 24 bits: float32's significand
	veltkamp25 = 1<<28 + 1
	veltkamp23 = 1<<30 + 1
)

// subnormalShift: adding and subtracting 1.5·2^-97 rounds a double of
// magnitude below 2^-126 to a multiple of 2^-149 (the double's ulp in
// [2^-97, 2^-96)), ties to even: float32's subnormal grid.
const subnormalShift = 0x1.8p-97

// Round32 mirrors r32's SQLite and ANSI arithmetic in Go, operation by
// operation (each conversion keeps Go from fusing a multiply and an add),
// so that tests can run it over millions of values cheaply; the SQL itself
// is run over a sample in the engines.
func Round32(x float64) float64 {
	split := func(x, k float64) float64 {
		c := float64(x * k)
		return float64(c - float64(c-x))
	}
	switch a := math.Abs(x); {
	case x == 0 || x != x:
		return x
	case a < f32MinNormal:
		if x < 0 {
			return float64(float64(float64(x*-1)+subnormalShift)-subnormalShift) * -1
		}
		return float64(float64(x+subnormalShift) - subnormalShift)
	case a >= f32Overflow:
		return math.Copysign(math.Inf(1), x)
	}
	h := split(x, veltkamp24)
	if x == split(x, veltkamp25) && x != h && h != split(h, veltkamp23) {
		return float64(2*x) - h
	}
	return h
}

// r32 is x rounded to the nearest float32, ties to even, as a double
// expression. x is referenced several times: pass a column or a small
// expression.
//
//   - postgres, duckdb: a cast to real (FLOAT) and back, with the ranges
//     where PostgreSQL raises an error instead of rounding (a result that
//     overflows, or a non-zero value that becomes zero; float.c's float8
//     to float4 cast) handled first; DuckDB refuses out-of-range casts.
//   - sqlite, ansi: Round32's arithmetic. For a normal x, Veltkamp's split
//     rounds to 24 bits; it may break a tie the odd way, so a tie (x has 25
//     bits, not 24) whose result is odd (has 24 bits, not 23) takes the
//     other neighbour, 2x − h. Below 2^-126 the subnormal grid is met by
//     adding and removing 1.5·2^-97 (on |x|, so that −tiny rounds to −0).
//     Zero is returned as it is (its sign kept); beyond f32Overflow, ±Inf.
func (g *gen) r32(x string) string {
	if strings.ContainsAny(x, " *+-/") {
		x = "(" + x + ")"
	}
	num := g.d.num
	switch g.d {
	case Postgres, DuckDB:
		real, dbl := "real", "float8"
		if g.d == DuckDB {
			real, dbl = "FLOAT", "DOUBLE"
		}
		return fmt.Sprintf("CASE WHEN ABS(%[1]s) <= %[2]s THEN %[1]s * %[3]s WHEN ABS(%[1]s) >= %[4]s THEN %[5]s ELSE CAST(CAST(%[1]s AS %[6]s) AS %[7]s) END",
			x, num(f32Half), num(0), num(f32Overflow), g.infTimes(x), real, dbl)
	}
	split := func(x string, k float64) string {
		return fmt.Sprintf("(%[1]s * %[2]s - (%[1]s * %[2]s - %[1]s))", x, num(k))
	}
	h := split(x, veltkamp24)
	return fmt.Sprintf("CASE WHEN %[1]s = %[2]s THEN %[1]s"+
		" WHEN ABS(%[1]s) < %[3]s THEN CASE WHEN %[1]s < %[2]s THEN ((%[1]s * %[4]s + %[5]s) - %[5]s) * %[4]s ELSE (%[1]s + %[5]s) - %[5]s END"+
		" WHEN ABS(%[1]s) >= %[6]s THEN %[7]s"+
		" WHEN %[1]s = %[8]s AND %[1]s <> %[9]s AND %[9]s <> %[10]s THEN %[11]s * %[1]s - %[9]s"+
		" ELSE %[9]s END",
		x, num(0), num(f32MinNormal), num(-1), num(subnormalShift), num(f32Overflow), g.infTimes(x),
		split(x, veltkamp25), h, split(h, veltkamp23), num(2))
}

// infTimes is +Inf times the sign of x (x non-zero, not NaN). SQLite
// reads 1e999 as Inf; PostgreSQL and DuckDB read 'Infinity'. ANSI text runs
// on all three: a cast of 'Infinity' is Inf in PostgreSQL and DuckDB and 0
// in SQLite, which then takes the product 1E308·1E308, Inf in SQLite (an
// error in PostgreSQL, which never evaluates it: the first branch is a
// constant true).
func (g *gen) infTimes(x string) string {
	switch g.d {
	case SQLite:
		return "1e999 * " + x
	case Postgres:
		return "'Infinity'::float8 * " + x
	case DuckDB:
		return "'Infinity'::DOUBLE * " + x
	case MySQL:
		// No infinity: ±1e300 stands in. newGen refuses models whose
		// outputs could be infinite, so only the float32 logistic meets it,
		// as expf(-z) overflowing, where round32(1/round32(1 + 1e300)) is
		// +0 as round32(1/(1 + Inf)) is.
		return fmt.Sprintf("CASE WHEN %s > %s THEN %s ELSE %s END", x, g.d.num(0), g.d.num(1e300), g.d.num(-1e300))
	case Spark:
		return "CAST('Infinity' AS DOUBLE) * " + x
	}
	inf := "CAST('Infinity' AS DOUBLE PRECISION)"
	big := g.d.num(1e308)
	return fmt.Sprintf("CASE WHEN %s > %s THEN %s * %s ELSE %s * %s * %s END", inf, g.d.num(0), inf, x, big, big, x)
}

// native32 reports whether the running sums are the engine's own float32
// type (see the top of this file).
func (g *gen) native32() bool {
	return g.p.Float32Accumulate() && (g.d == Postgres || g.d == DuckDB)
}

// acc spells a float32 value (a leaf or a base score) for the running sums:
// cast to real (FLOAT) where they are of that type, else the double.
func (g *gen) acc(v float64) string {
	switch {
	case !g.native32():
		return g.d.num(v)
	case g.d == Postgres:
		return "CAST(" + g.d.num(v) + " AS real)"
	}
	return "CAST(" + g.d.num(v) + " AS FLOAT)"
}

// toDouble reads a running sum as a double.
func (g *gen) toDouble(z string) string {
	switch {
	case !g.native32():
		return z
	case g.d == Postgres:
		return "CAST(" + z + " AS float8)"
	}
	return "CAST(" + z + " AS DOUBLE)"
}

// Round32SQL is the dialect's expression for x rounded to the nearest
// float32 (x a column or a small expression), for tests that run it in the
// engines.
func Round32SQL(d Dialect, x string) string {
	g := &gen{d: d, p: &compile.Program{}}
	return g.r32(x)
}
