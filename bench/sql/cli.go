package main

import (
	"context"
	dbsql "database/sql"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

var runTime = regexp.MustCompile(`Run Time: real ([0-9.]+) user ([0-9.]+) sys ([0-9.]+)`)

// cliSide scores the rows with the native sqlite3 shell: the rows go into
// a database file through the embedded driver (bound doubles, so no text
// conversion can change a bit), the shell runs CREATE TABLE r AS the
// statement under .timer, and the result is read back through the driver
// and held against the interpreter. It returns a line for the table.
func cliSide(ctx context.Context, cli string, p *compile.Program, layout string, rows *forest.Rows, want []float64, wantCls []int) (string, error) {
	dir, err := os.MkdirTemp("", "sqlbench-cli")
	if err != nil {
		return "", err
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "rows.db")
	db, err := dbsql.Open("sqlite", path)
	if err != nil {
		return "", err
	}
	defer db.Close()
	cols := []string{`"sawmill_row" INTEGER`}
	marks := []string{"?"}
	for _, f := range p.Features {
		cols = append(cols, quote(f.Name)+" REAL")
		marks = append(marks, "?")
	}
	if _, err := db.ExecContext(ctx, "CREATE TABLE input ("+strings.Join(cols, ", ")+")"); err != nil {
		return "", err
	}
	tx, err := db.BeginTx(ctx, nil)
	if err != nil {
		return "", err
	}
	ins, err := tx.PrepareContext(ctx, "INSERT INTO input VALUES ("+strings.Join(marks, ", ")+")")
	if err != nil {
		return "", err
	}
	vals := make([]any, len(p.Features)+1)
	for r := 0; r < rows.Len(); r++ {
		vals[0] = r
		for j, v := range rows.Row(r) {
			vals[j+1] = v
			if math.IsNaN(v) {
				vals[j+1] = nil
			}
		}
		if _, err := ins.ExecContext(ctx, vals...); err != nil {
			return "", err
		}
	}
	if err := tx.Commit(); err != nil {
		return "", err
	}
	files, err := sqltarget.Emit(p, sqltarget.Options{Dialect: sqltarget.SQLite, Layout: layout, Keep: []string{"sawmill_row"}})
	if err != nil {
		return "", err
	}
	stmt := strings.TrimSuffix(strings.TrimSpace(string(files[0].Data)), ";")
	shell := func(script string) (real, user float64, err error) {
		cmd := exec.CommandContext(ctx, cli, path)
		cmd.Stdin = strings.NewReader(script)
		out, err := cmd.CombinedOutput()
		if err != nil || strings.Contains(string(out), "Error") {
			return 0, 0, fmt.Errorf("sqlite3: %v: %.400s", err, out)
		}
		m := runTime.FindStringSubmatch(string(out))
		if m == nil {
			return 0, 0, fmt.Errorf("sqlite3 printed no run time: %.400s", out)
		}
		real, _ = strconv.ParseFloat(m[1], 64)
		user, _ = strconv.ParseFloat(m[2], 64)
		return real, user, nil
	}
	prep, _, err := shell(".timer on\nSELECT count(*) FROM (" + stmt + ") WHERE 0;\n")
	if err != nil {
		return "", err
	}
	real, user, err := shell(".timer on\nCREATE TABLE r AS " + stmt + ";\n")
	if err != nil {
		return "", err
	}
	got := make([]float64, len(want))
	k := p.NumOutputs
	q, err := db.QueryContext(ctx, "SELECT * FROM r ORDER BY sawmill_row")
	if err != nil {
		return "", err
	}
	defer q.Close()
	names, _ := q.Columns()
	classOf := map[string]int{}
	for i, c := range p.Classes {
		classOf[c] = i
	}
	var gotCls []int
	dest := make([]any, len(names))
	for r := 0; q.Next(); r++ {
		var id int
		out := make([]float64, k)
		var cls string
		dest[0] = &id
		for j := range out {
			dest[j+1] = &out[j]
		}
		if len(names) > k+1 {
			dest[k+1] = &cls
		}
		if err := q.Scan(dest...); err != nil {
			return "", err
		}
		copy(got[id*k:], out)
		if len(names) > k+1 {
			gotCls = append(gotCls, classOf[cls])
		}
	}
	if err := q.Err(); err != nil {
		return "", err
	}
	r, _ := verify.SQLRunner("sqlite")
	exact, bound := r.Tolerance("", p)
	if m := verify.Compare(want, got, wantCls, gotCls, k, exact, bound); !m.OK() {
		return "", fmt.Errorf("sqlite3 shell %s: %s", layout, m)
	}
	lay, _, _ := sqltarget.Resolve(p, sqltarget.Options{Dialect: sqltarget.SQLite, Layout: layout})
	n := float64(rows.Len())
	return fmt.Sprintf("%-22s %12.0f %10s %10s %12d   (%s, CASE nested at most %d; %.0f rows/s of CPU time, user %.2fs)",
		"sqlite3 shell "+layout, n/real, time.Duration(prep*float64(time.Second)).Round(time.Millisecond),
		time.Duration(real*float64(time.Second)).Round(time.Millisecond), len(files[0].Data), lay, sqltarget.DefaultMaxNest[sqltarget.SQLite], n/user, user), nil
}

func quote(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }
