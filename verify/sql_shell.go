package verify

import (
	"bytes"
	"context"
	dbsql "database/sql"
	"encoding/hex"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
)

// The system sqlite3 shell. Most SQLite users run the stock build (the
// shell, Python's sqlite3 module, Android, iOS), whose parser stack is a
// fixed 100 entries, where the embedded driver's SQLite 3.54.1 grows its
// own; a statement only the embedded engine accepts proves little, so the
// sqlite runner's "shell" variants run the statement in the shell too.
//
// The rows reach the shell in a database file the embedded driver writes
// through bound doubles, and come back as text the shell prints: every
// output as printf('%!.20e', z), which was measured (Debian's sqlite3 3.40.1,
// 360,000 doubles: random bit patterns, subnormals, integers up to 2^60,
// the largest double) to read back as the same double every time, where
// '%!.17g' missed 778 of them (SQLite 3.40's printf converts through long
// double); zero's sign is lost by every printf, so -0 is printed as "-0"
// when atan2(z, -1) is negative (-pi for -0, +pi for +0; the math functions
// are compiled in, as EXP needs them anyway); NULL as "null"; the label in
// hex, so no character of it can break the line.

var shellOnce struct {
	sync.Once
	path, version string
	err           error
}

// SQLiteShell returns the path and version of the sqlite3 shell on PATH, or
// an error wrapping ErrSkip when there is none.
func SQLiteShell() (path, version string, err error) {
	shellOnce.Do(func() {
		p, err := exec.LookPath("sqlite3")
		if err != nil {
			shellOnce.err = fmt.Errorf("%w: no sqlite3 shell on PATH (Debian: apt-get install sqlite3)", ErrSkip)
			return
		}
		out, err := exec.Command(p, "-version").Output()
		if err != nil {
			shellOnce.err = fmt.Errorf("%s -version: %v", p, err)
			return
		}
		v, _, _ := strings.Cut(strings.TrimSpace(string(out)), " ")
		shellOnce.path, shellOnce.version = p, v
	})
	return shellOnce.path, shellOnce.version, shellOnce.err
}

// shellFormat is the text the shell prints for double z, read back by
// parseShellNum.
func shellFormat(z string) string {
	return fmt.Sprintf("CASE WHEN %s IS NULL THEN 'null' WHEN %s = 0 AND atan2(%s, -1e0) < 0 THEN '-0' ELSE printf('%%!.20e', %s) END", z, z, z, z)
}

// parseShellNum reads what shellFormat printed.
func parseShellNum(s string) (dbsql.NullFloat64, error) {
	switch s {
	case "null":
		return dbsql.NullFloat64{}, nil
	case "-0":
		return dbsql.NullFloat64{Float64: negZero, Valid: true}, nil
	}
	v, err := strconv.ParseFloat(s, 64)
	return dbsql.NullFloat64{Float64: v, Valid: err == nil}, err
}

var negZero = func() float64 { z := 0.0; return -z }()

// shellRun runs the statement text in the sqlite3 shell on the database
// file path (which load filled) and reads the result as run does. A view
// statement is run, then read.
func shellRun(ctx context.Context, p *compile.Program, o sqltarget.Options, text, path string, n int) (*Result, error) {
	shell, version, err := SQLiteShell()
	if err != nil {
		return nil, err
	}
	name := "sqlite3 shell " + version
	var cols []string
	cols = append(cols, quoteIdent(o.Keep[0]))
	outs := o.Outputs
	if outs == nil {
		outs = sqltarget.OutputNames(p)
	}
	for _, c := range outs {
		cols = append(cols, shellFormat(quoteIdent(c)))
	}
	if p.IsClassifier() {
		cols = append(cols, "hex("+quoteIdent("class")+")")
	}
	var script strings.Builder
	script.WriteString(".bail on\n.mode list\n.separator | \"\\n\"\n")
	if o.View != "" {
		script.WriteString(text)
		from := quoteIdent(o.View)
		if o.Schema != "" {
			from = quoteIdent(o.Schema) + "." + from
		}
		fmt.Fprintf(&script, "\nSELECT %s FROM %s;\n", strings.Join(cols, ", "), from)
	} else {
		stmt := strings.TrimSuffix(strings.TrimRight(text, "\n "), ";")
		fmt.Fprintf(&script, "SELECT %s FROM (\n%s\n) AS sawmill_shell;\n", strings.Join(cols, ", "), stmt)
	}
	cmd := exec.CommandContext(ctx, shell, "-batch", path)
	cmd.Stdin = strings.NewReader(script.String())
	var stdout, stderr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &stdout, &stderr
	start := time.Now()
	err = cmd.Run()
	took := time.Since(start)
	if err != nil || stderr.Len() > 0 {
		msg := strings.TrimSpace(stderr.String())
		if len(msg) > 2000 {
			msg = msg[:2000] + " …"
		}
		return nil, fmt.Errorf("%s (%s): %v: %s", name, shell, err, msg)
	}
	c := newCollector(p, n, nil, name)
	vals := make([]dbsql.NullFloat64, p.NumOutputs)
	want := 1 + len(vals)
	if p.IsClassifier() {
		want++
	}
	for i, line := range strings.Split(strings.TrimSuffix(stdout.String(), "\n"), "\n") {
		if line == "" && n == 0 {
			continue
		}
		f := strings.Split(line, "|")
		if len(f) != want {
			return nil, fmt.Errorf("%s: output line %d has %d fields, want %d: %.200q", name, i+1, len(f), want, line)
		}
		id, err := strconv.ParseInt(f[0], 10, 64)
		if err != nil {
			return nil, fmt.Errorf("%s: output line %d: row number %q", name, i+1, f[0])
		}
		for j := range vals {
			if vals[j], err = parseShellNum(f[1+j]); err != nil {
				return nil, fmt.Errorf("%s: output line %d: output %d: %v", name, i+1, j, err)
			}
		}
		var label dbsql.NullString
		if p.IsClassifier() {
			b, err := hex.DecodeString(f[want-1])
			if err != nil {
				return nil, fmt.Errorf("%s: output line %d: label %q is not hex", name, i+1, f[want-1])
			}
			label = dbsql.NullString{String: string(b), Valid: true}
		}
		if err := c.add(id, vals, label); err != nil {
			return nil, err
		}
	}
	res, err := c.finish()
	if err != nil {
		return nil, err
	}
	res.Run = took
	res.Toolchain = fmt.Sprintf("sqlite3 %s (%s)", version, shell)
	return res, nil
}

// shellFile returns a fresh database file path for a shell run, in a
// folder removed by the returned func.
func shellFile() (string, func(), error) {
	dir, err := os.MkdirTemp("", "sawmill-sqlite3-")
	if err != nil {
		return "", nil, err
	}
	return filepath.Join(dir, "rows.db"), func() { os.RemoveAll(dir) }, nil
}
