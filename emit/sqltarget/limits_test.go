package sqltarget

import (
	"fmt"
	"os/exec"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// stockShell returns Debian's sqlite3 shell (the stock build most SQLite
// users have), skipping the test where there is none, unless
// SAWMILL_REQUIRE_ENGINES is set.
func stockShell(t *testing.T) string {
	t.Helper()
	p := testenv.Tool(t, "sqlite3", "Debian package sqlite3")
	return p
}

// shellRuns reports whether the shell runs script, and what it printed.
func shellRuns(t *testing.T, shell, script string) (bool, string) {
	t.Helper()
	cmd := exec.Command(shell, "-batch", "-bail", ":memory:")
	cmd.Stdin = strings.NewReader(script)
	out, err := cmd.CombinedOutput()
	return err == nil && !strings.Contains(string(out), "Error"), string(out)
}

// worstChain is the shape that takes the most parser stack per level of
// CASE: a chain of depth splits whose deeper child is always written first
// (missing values go left, so each split is "x > t" with the subtree in
// THEN), under CREATE VIEW.
func worstChain(t *testing.T, depth int) *compile.Program {
	t.Helper()
	var tr forest.Tree
	for i := 0; i < depth; i++ {
		split := len(tr.Left)
		tr.Feature = append(tr.Feature, 0, -1)
		tr.Threshold = append(tr.Threshold, float64(i), 0)
		tr.Left = append(tr.Left, split+1, -1)
		tr.Right = append(tr.Right, split+2, -1)
		tr.MissingLeft = append(tr.MissingLeft, true, false)
		tr.Value = append(tr.Value, 0, float64(i)+0.5)
	}
	tr.Feature = append(tr.Feature, -1)
	tr.Threshold = append(tr.Threshold, 0)
	tr.Left = append(tr.Left, -1)
	tr.Right = append(tr.Right, -1)
	tr.MissingLeft = append(tr.MissingLeft, false)
	tr.Value = append(tr.Value, -1)
	f := &forest.Forest{Task: forest.Regression, Features: []string{"x"}, InputPrecision: forest.Float64,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0.25}, Trees: []forest.Tree{tr, tr}}
	require.NoError(t, f.Validate("chain"))
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	require.Equal(t, depth, p.MaxDepth())
	return p
}

// TestSQLiteShellLimits measures, in the system sqlite3 shell (Debian's
// 3.40.1 here), how deep the worst CASE shape this package writes may nest
// before "parser stack overflow", for sqlite and ansi text in both layouts,
// and holds DefaultMaxNest at least margin levels below it; and it reads
// the build's other limits (".limit") against the ones checkSize and the
// package doc assume.
func TestSQLiteShellLimits(t *testing.T) {
	shell := stockShell(t)
	margin := map[Dialect]int{SQLite: 3, ANSI: 4}
	for _, d := range []Dialect{SQLite, ANSI} {
		for _, layout := range []string{emit.Nested, emit.Table} {
			last := 0
			var failure string
			for n := 4; n <= 40; n++ {
				files, err := Emit(worstChain(t, n), Options{Dialect: d, Layout: layout, MaxNest: n, View: "v"})
				require.NoError(t, err)
				ok, out := shellRuns(t, shell, "CREATE TABLE input (x REAL);\n"+string(files[0].Data)+"SELECT * FROM v;\n")
				if !ok {
					failure = out
					break
				}
				last = n
			}
			require.Contains(t, failure, "parser stack overflow", "%s %s: no overflow up to 40 levels: a shell with a bigger parser stack?", d, layout)
			t.Logf("%s %s: CASE nests %d deep in the shell, fails at %d; default %d", d, layout, last, last+1, DefaultMaxNest[d])
			require.LessOrEqual(t, DefaultMaxNest[d]+margin[d], last, "%s %s: default MaxNest %d leaves less than %d levels of margin", d, layout, DefaultMaxNest[d], margin[d])
			// The default itself, through auto, on the chain at the default depth.
			files, err := Emit(worstChain(t, DefaultMaxNest[d]), Options{Dialect: d, View: "v"})
			require.NoError(t, err)
			ok, out := shellRuns(t, shell, "CREATE TABLE input (x REAL);\n"+string(files[0].Data)+"SELECT * FROM v;\n")
			require.True(t, ok, "%s auto at the default: %s", d, out)
		}
	}

	ok, out := shellRuns(t, shell, ".limit\n")
	require.True(t, ok, out)
	limit := func(name string) int {
		m := regexp.MustCompile(`(?m)^\s*` + name + `\s+(\d+)$`).FindStringSubmatch(out)
		require.NotNil(t, m, "no %s in .limit: %s", name, out)
		v, _ := strconv.Atoi(m[1])
		return v
	}
	require.Equal(t, sqliteMaxColumns, limit("column"))
	require.Equal(t, sqliteMaxSQLLength, limit("sql_length"))
	require.Equal(t, 1000, limit("expr_depth"), "the package doc's expression depth")
	require.Equal(t, 500, limit("compound_select"), "the package doc's compound SELECT terms")
	// and that each is where it bites: one past it fails.
	cols := func(n int) string {
		var c []string
		for i := 0; i < n; i++ {
			c = append(c, fmt.Sprintf("c%d", i))
		}
		return "CREATE TABLE w (" + strings.Join(c, ", ") + ");\n"
	}
	ok, _ = shellRuns(t, shell, cols(sqliteMaxColumns))
	require.True(t, ok)
	ok, out = shellRuns(t, shell, cols(sqliteMaxColumns+1))
	require.False(t, ok, out)
}

// TestSQLiteColumnLimit: a statement whose sub-queries would carry more
// columns than stock SQLite allows is refused with the limit named; the
// other dialects write it.
func TestSQLiteColumnLimit(t *testing.T) {
	n := sqliteMaxColumns + 10
	f := &forest.Forest{Task: forest.Regression, InputPrecision: forest.Float64,
		Combine: forest.Sum, Transform: forest.NoTransform, BaseScore: []float64{0}}
	for i := 0; i < n; i++ {
		f.Features = append(f.Features, fmt.Sprintf("f%d", i))
		f.Trees = append(f.Trees, forest.Tree{Feature: []int{i, -1, -1}, Threshold: []float64{0.5, 0, 0},
			Left: []int{1, -1, -1}, Right: []int{2, -1, -1}, MissingLeft: make([]bool, 3), Value: []float64{0, 1, 2}})
	}
	require.NoError(t, f.Validate("wide"))
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	_, err = Emit(p, Options{Dialect: SQLite})
	require.Error(t, err)
	require.Contains(t, err.Error(), "SQLITE_MAX_COLUMN")
	require.Contains(t, err.Error(), "hint:")
	_, err = Emit(p, Options{Dialect: DuckDB})
	require.NoError(t, err)
}
