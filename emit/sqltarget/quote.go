package sqltarget

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"
)

// checkText rejects text that no engine can hold in an identifier or a
// string literal: NUL bytes, invalid UTF-8 and the empty string.
func checkText(what, s string) error {
	switch {
	case s == "":
		return fmt.Errorf("%s is empty: SQL has no empty identifier", what)
	case strings.IndexByte(s, 0) >= 0:
		return fmt.Errorf("%s %q holds a NUL byte, which no SQL engine accepts in identifiers or strings\nhint: rename it in the model or the options", what, s)
	case !utf8.ValidString(s):
		return fmt.Errorf("%s %q is not valid UTF-8", what, s)
	}
	return nil
}

// ident quotes s as a delimited identifier (ISO/IEC 9075 <delimited
// identifier>): inside double quotes a double quote is doubled and every
// other character, backslash included, stands for itself, in sqlite,
// postgres, duckdb and ansi. MySQL and MariaDB read double quotes as
// strings unless sql_mode has ANSI_QUOTES, which is not assumed (MySQL 8.0
// manual, 11.2 "Schema Object Names"); Spark SQL reads a double-quoted name
// as a string unless spark.sql.ansi.doubleQuotedIdentifiers is on (Spark's
// BACKQUOTED_IDENTIFIER token, SqlBaseLexer.g4). So mysql and spark text
// quote in backquotes, a backquote inside doubled, every other character
// itself. s must have passed checkText.
func (d Dialect) ident(s string) string {
	if d == MySQL || d == Spark {
		return "`" + strings.ReplaceAll(s, "`", "``") + "`"
	}
	return `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
}

// str quotes s as a character string literal: inside single quotes a single
// quote is doubled and nothing else is special. This holds in SQLite and
// DuckDB, in ANSI SQL, and in PostgreSQL with standard_conforming_strings on
// (its default since 9.1); with it off, PostgreSQL would read backslashes as
// escapes, so the header of every postgres file says so.
//
// MySQL and MariaDB read a backslash in a string as an escape unless
// sql_mode has NO_BACKSLASH_ESCAPES; mysql text spells each backslash as
// CHAR(92 USING utf8mb4) joined by CONCAT, which reads the same under
// either mode.
//
// Spark SQL has no doubled quote (two adjacent literals are concatenated,
// so a quote written twice is no quote) and reads backslash escapes unless
// spark.sql.parser.escapedStringLiterals is on: a label holding a quote or
// a backslash is written as its UTF-8 bytes, CAST(X'...' AS STRING), which
// reads the same under either setting (measured in TestSparkStrings).
func (d Dialect) str(s string) string {
	if d == Spark && strings.ContainsAny(s, `'\`) {
		return fmt.Sprintf("CAST(X'%X' AS STRING)", s)
	}
	q := func(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }
	if d != MySQL || !strings.Contains(s, `\`) {
		return q(s)
	}
	parts := strings.Split(s, `\`)
	var out []string
	for i, part := range parts {
		if i > 0 {
			out = append(out, "CHAR(92 USING utf8mb4)")
		}
		if part != "" {
			out = append(out, q(part))
		}
	}
	return "CONCAT(" + strings.Join(out, ", ") + ")"
}

// num (Literal) spells a finite float64 so that the dialect reads back exactly the same
// double, with the type double precision (never an exact numeric):
//
//   - sqlite, duckdb: the shortest round-trip decimal in exponent form,
//     "1.5e+00". SQLite reads any literal with an exponent as REAL (an
//     integer-looking literal would be INTEGER and add in integer
//     arithmetic); DuckDB reads a literal with an exponent as DOUBLE, while
//     "0.1" without one would be DECIMAL(1,1) and add exactly. Both keep -0
//     ("-0e+00").
//   - postgres: the same digits cast, "1.5e+00::float8". PostgreSQL types
//     every literal with a point or exponent as numeric, and numeric sums are
//     exact; the cast goes through float8in (correctly rounded). numeric has
//     no -0, so -0 is written -(0e+00::float8), a float8 negation.
//   - spark: "1.5e+00D". The D suffix types the literal DOUBLE whatever
//     spark.sql.legacy.exponentLiteralAsDecimal.enabled says (Spark SQL
//     reads an exponent literal as DOUBLE by default, a plain 0.1 as
//     DECIMAL); Spark parses it with Java's Double.parseDouble (correctly
//     rounded). -0 is "-0e+00D", the negation of a double zero.
//   - ansi: CAST(1.5E+00 AS DOUBLE PRECISION). ISO/IEC 9075 leaves the
//     precision of an approximate numeric literal to the implementation, so
//     the cast pins it. -0 is CAST('-0E+00' AS DOUBLE PRECISION), a cast from
//     text: SQLite turns -CAST(0E+00 AS ...) into +0, PostgreSQL reads -0E+00
//     as numeric, which has no -0.
func (d Dialect) num(v float64) string { return d.Literal(v) }

// Literal spells a finite float64 as the dialect's double literal (see num).
func (d Dialect) Literal(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		panic(fmt.Sprintf("BUG: sql literal %v is not finite", v))
	}
	s := strconv.FormatFloat(v, 'e', -1, 64)
	negZero := v == 0 && math.Signbit(v)
	switch d {
	case Postgres:
		if negZero {
			return "-(0e+00::float8)"
		}
		return s + "::float8"
	case Spark:
		return s + "D"
	case ANSI:
		s = strings.ToUpper(s)
		if negZero {
			return "CAST('-0E+00' AS DOUBLE PRECISION)"
		}
		return "CAST(" + s + " AS DOUBLE PRECISION)"
	}
	return s
}

// mysqlSpace is the white space MySQL does not allow at the end of a name.
const mysqlSpace = " \t\n\v\f\r"

// checkLength refuses, in mysql text, a name longer than limit characters
// (64 for tables and columns, 256 for a column alias), ending in white
// space (error 1166, "Incorrect column name", for a tab and a vertical
// tab: golden cases diff-mysql-trailing-tab, diff-mysql-vertical-tab),
// or holding a character outside the Basic Multilingual Plane, which MySQL
// and MariaDB refuse (MySQL 8.0 manual, 11.2 "Schema Object Names";
// measured on MariaDB 10.11: error 1059, "Identifier name ... is too
// long", and error 1300, "Invalid utf8mb4 character string", for an emoji,
// found by the differential test, golden case diff-mysql-astral-names).
// Other dialects have no such rule here (PostgreSQL's truncation is
// foldName's).
func (d Dialect) checkLength(what, s string, limit int) error {
	if d != MySQL {
		return nil
	}
	if n := utf8.RuneCountInString(s); n > limit {
		return fmt.Errorf("%s %q is %d characters long, and MySQL allows %d", what, s, n, limit)
	}
	if strings.TrimRight(s, mysqlSpace) != s {
		return fmt.Errorf("%s %q ends with white space, which MySQL does not allow in a name", what, s)
	}
	for _, r := range s {
		if r > 0xFFFF {
			return fmt.Errorf("%s %q holds %q, outside the Basic Multilingual Plane, which MySQL does not allow in a name", what, s, r)
		}
	}
	return nil
}

// foldName is the form under which the dialect compares identifiers:
// SQLite and DuckDB match even quoted identifiers without regard to ASCII
// case; PostgreSQL keeps case but truncates identifiers to 63 bytes
// (NAMEDATALEN-1); ANSI compares delimited identifiers as written. Spark
// resolves names without regard to case (spark.sql.caseSensitive is off by
// default; its resolver compares with Java's equalsIgnoreCase, which folds
// every letter, not ASCII only): each rune is folded to the least of its
// Unicode simple case folding orbit.
func (d Dialect) foldName(s string) string {
	switch d {
	case MySQL:
		// Column names compare without regard to case and accents
		// (MySQL 8.0 manual, 11.2.3 "Identifier Case Sensitivity"); lower
		// case covers case, and accents are left to the engine's error.
		return strings.ToLower(s)
	case Spark:
		return strings.Map(foldRune, s)
	case SQLite, DuckDB:
		b := []byte(s)
		for i, c := range b {
			if 'A' <= c && c <= 'Z' {
				b[i] = c + 'a' - 'A'
			}
		}
		return string(b)
	case Postgres:
		if len(s) <= 63 {
			return s
		}
		n := 63
		for n > 0 && !utf8.RuneStart(s[n]) {
			n--
		}
		return s[:n]
	}
	return s
}

// foldRune maps r to the least rune of its simple case folding orbit, so
// that runes equal without regard to case map to the same rune.
func foldRune(r rune) rune {
	least := r
	for f := unicode.SimpleFold(r); f != r; f = unicode.SimpleFold(f) {
		least = min(least, f)
	}
	return least
}
