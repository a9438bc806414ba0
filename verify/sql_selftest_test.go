package verify

import (
	"context"
	"fmt"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/internal/testenv"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
)

// splitScript cuts a script into statements at semicolons outside string
// literals, delimited identifiers and comments.
func splitScript(s string) []string {
	var out []string
	start := 0
	for i := 0; i < len(s); i++ {
		switch s[i] {
		case '\'', '"':
			q := s[i]
			for i++; i < len(s) && s[i] != q; i++ {
			}
		case '-':
			if i+1 < len(s) && s[i+1] == '-' {
				for ; i < len(s) && s[i] != '\n'; i++ {
				}
			}
		case ';':
			if st := strings.TrimSpace(s[start:i]); st != "" {
				out = append(out, st)
			}
			start = i + 1
		}
	}
	return out
}

// runSelftest runs a self-test script in the engine (variant "shell": the
// sqlite3 shell) and returns the rows it selected, as text.
func runSelftest(t *testing.T, r sqlRunner, shell bool, script string) []string {
	t.Helper()
	if shell {
		path, _, err := SQLiteShell()
		if err != nil {
			testenv.Need(t, err)
		}
		cmd := exec.Command(path, "-batch", "-bail", filepath.Join(t.TempDir(), "selftest.db"))
		cmd.Stdin = strings.NewReader(script)
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("sqlite3 shell: %v: %.2000s", err, out)
		}
		return strings.Fields(string(out))
	}
	db := sqlSession(t, r)
	ctx := context.Background()
	if db.schema != "" {
		if _, err := db.conn.ExecContext(ctx, "SET search_path TO "+db.schema); err != nil {
			t.Fatal(err)
		}
	}
	stmts := splitScript(script)
	for _, s := range stmts[:len(stmts)-1] {
		if _, err := db.conn.ExecContext(ctx, s); err != nil {
			t.Fatalf("%s: %v in %.300s", r.engine, shorten(err), s)
		}
	}
	q, err := db.conn.QueryContext(ctx, stmts[len(stmts)-1])
	if err != nil {
		t.Fatalf("%s: %v", r.engine, shorten(err))
	}
	defer q.Close()
	cols, _ := q.Columns()
	var rows []string
	for q.Next() {
		vals := make([]any, len(cols))
		ptrs := make([]any, len(cols))
		for i := range vals {
			ptrs[i] = &vals[i]
		}
		if err := q.Scan(ptrs...); err != nil {
			t.Fatal(err)
		}
		rows = append(rows, fmt.Sprint(vals...))
	}
	if err := q.Err(); err != nil {
		t.Fatal(err)
	}
	return rows
}

// plantedLeaf matches the first leaf written after ELSE in a nested CASE
// with its comment: the value, then "-- leaf N".
var plantedLeaf = regexp.MustCompile(`ELSE (.+?) -- leaf \d+`)

// TestSQLSelftest runs the --selftest script of a regression, a logistic
// and a multi-class model in every engine, embedded SQLite, the sqlite3
// shell, DuckDB and PostgreSQL, in the engine's dialect and in ANSI: it
// must return no row. Then one leaf of the scoring statement in the script
// is changed by hand, and the rows reaching that leaf must come back.
func TestSQLSelftest(t *testing.T) {
	for _, name := range []string{"edge-nan-routing", "edge-logistic", "trained-wine"} {
		c, err := goldencase.LoadCase(filepath.Join(goldenCases, name), name)
		if err != nil {
			t.Fatal(err)
		}
		p, _, err := compile.Compile(c.Model, compile.Options{})
		if err != nil {
			t.Fatal(err)
		}
		probes := SelftestProbes(c.Model)
		for _, r := range sqlEngineRunners {
			for _, variant := range allSQLVariants {
				shell := isShell(variant)
				if shell && r.engine != "sqlite" {
					continue
				}
				t.Run(name+"/"+r.engine+"-"+variant, func(t *testing.T) {
					f, err := sqltarget.Selftest(p, sqltarget.Options{Dialect: r.dialect(variant), Layout: emit.Nested}, probes)
					if err != nil {
						t.Fatal(err)
					}
					script := string(f.Data)
					if got := runSelftest(t, r, shell, script); len(got) != 0 {
						t.Fatalf("%d rows differ, want none: %q", len(got), got[:min(3, len(got))])
					}
					m := plantedLeaf.FindStringSubmatchIndex(script)
					if m == nil {
						t.Fatal("no leaf comment in the self-test's statement")
					}
					planted := script[:m[2]] + r.dialect(variant).Literal(12345.5) + script[m[3]:]
					got := runSelftest(t, r, shell, planted)
					if len(got) == 0 {
						t.Fatalf("leaf %q changed to 12345.5: no row came back", script[m[2]:m[3]])
					}
					t.Logf("%d probe rows: none differ; with leaf %q changed, %d rows come back", len(probes), script[m[2]:m[3]], len(got))
				})
			}
		}
	}
}
