// Package verify proves that emitted code scores like the model: it builds
// the code each target emits with that target's real toolchain or engine,
// runs it over rows, and compares every output with the reference
// interpreter (forest.Predict). Verify runs every target's Runner and
// returns a Report; Runners lists them, one per target.
//
// The defaults suit a user's machine: C needs one working compiler, warnings
// are not errors, and PostgreSQL is tried only at the address Options or
// SAWMILL_POSTGRES_DSN give. A test suite asks for more through Strict.
package verify

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// Runner builds and runs one target's emitted code.
type Runner interface {
	Name() string      // "go", "c", "sqlite", "duckdb", "postgres"
	Layouts() []string // layouts to test
	Variants() []string
	// CompileOptions are the compile.Options this variant needs.
	CompileOptions(variant string) compile.Options
	// Score emits p into dir, builds or loads it, scores every row and
	// returns the outputs back to back and, for classifiers, the classes.
	Score(ctx context.Context, p *compile.Program, layout, variant string, rows *forest.Rows, dir string) (*Result, error)
	// Tolerance reports whether the variant must be bit-exact, else the
	// bound on the absolute difference from the interpreter.
	Tolerance(variant string, p *compile.Program) (exact bool, bound float64)
}

// SnapshotVersion is the sawmill version an Emitter's files name in their
// headers, pinned so that a release does not rewrite every snapshot.
const SnapshotVersion = "test"

// Emitter is implemented by runners whose generated source can be kept as
// a snapshot; the files name SnapshotVersion.
type Emitter interface {
	Emit(p *compile.Program, layout, variant string) ([]emit.File, error)
}

// Result is what one run of emitted code gave.
type Result struct {
	Outputs []float64 // NumOutputs per row, back to back
	Classes []int     // per row for classifiers, else nil
	Build   time.Duration
	Run     time.Duration
	// Toolchain names the compilers, engines and versions that built or ran
	// the code, with their flags where they matter ("gcc 12.2.0 -std=c99
	// -O2; clang 14.0.6 -std=c11 -O0", "sqlite3 3.40.1 (/usr/bin/sqlite3)");
	// "" when the runner does not say.
	Toolchain string
}

// Config is how the runners build and where they connect. The zero Config
// suits a user's machine: C needs one working compiler and its warnings are
// not errors, and PostgreSQL is looked for where SAWMILL_POSTGRES_DSN or
// PostgreSQL's own defaults say (see PostgresDSN). A test suite asks for
// more.
type Config struct {
	// PostgresDSN is the server the postgres runner uses; "" means
	// PostgresDSN().
	PostgresDSN string
	// MySQLDSN is the MySQL or MariaDB server the mysql runner uses
	// (github.com/go-sql-driver/mysql's form, user@tcp(host:port)/db); ""
	// means MySQLDSN(), and with neither the runner is skipped.
	MySQLDSN string
	// Werror builds C with -Werror besides the warning flags, so generated
	// C that draws a warning fails.
	Werror bool
	// AllCompilers requires gcc, clang and g++ for C, so the matrix of C
	// builds never shrinks unseen; without it any one of gcc, clang and cc
	// does every build.
	AllCompilers bool
	// Boards adds the runners that build emitted C for Cortex-M4, Cortex-M0,
	// RV32 and AArch64 and run it under QEMU (BoardRunnerName), and emitted
	// Go for arm64 under qemu-aarch64 (GoArchRunner); a run costs a cross
	// build and an emulator start per check, so each board runs one layout
	// (see LayoutsFor).
	Boards bool
	// IntLeaves (16 or 32) builds the C runners' code with integer leaves
	// (ctarget.Options.IntLeaves), lossy: outputs are held within the
	// bound ctarget derives, labels only where the bound decides them.
	IntLeaves int
	// SparkPython is the Python (with pyspark) the spark runner starts; ""
	// means SparkPython().
	SparkPython string
}

// Runners lists every target's runner with the zero Config.
func Runners() []Runner { return RunnersWith(Config{}) }

// RunnersWith lists every target's runner, configured by c. A new target
// adds one line here.
func RunnersWith(c Config) []Runner {
	rs := []Runner{
		goRunner{},
		sqliteRunner{sqlRunner{engine: "sqlite"}},
		sqlRunner{engine: "duckdb"},
		sqlRunner{engine: "postgres", dsn: c.PostgresDSN},
		sqlRunner{engine: "mysql", dsn: c.MySQLDSN},
		sparkRunner{sqlRunner: sqlRunner{engine: "spark"}, python: c.SparkPython},
		cRunner{Werror: c.Werror, AllCompilers: c.AllCompilers, cEmit: cEmit{IntLeaves: c.IntLeaves}},
	}
	if c.Boards {
		rs = append(rs, boardRunner{Werror: c.Werror, Quick: true, cEmit: cEmit{IntLeaves: c.IntLeaves}}, goRunner{Arch: "arm64"})
	}
	return rs
}

// LayoutsFor is implemented by runners that run some variants in fewer
// layouts than Layouts lists; callers that iterate variants and layouts
// use LayoutsOf.
type LayoutsFor interface {
	LayoutsFor(variant string) []string
}

// LayoutsOf is the layouts r runs variant in: LayoutsFor's, else Layouts.
func LayoutsOf(r Runner, variant string) []string {
	if l, ok := r.(LayoutsFor); ok {
		return l.LayoutsFor(variant)
	}
	return r.Layouts()
}

// Mismatch describes the first disagreement between a run and the
// reference, with the measured maximum difference over all rows.
type Mismatch struct {
	Rows, Exact   int
	MaxAbsDiff    float64
	LabelMismatch int
	// Open counts the rows whose reference top two outputs (or one output
	// and 0.5) are within 2×bound, where the labels may differ.
	Open           int
	FirstRow       int // -1 when every row agrees
	FirstOutput    int
	Got, Want      float64
	GotCls, WantCl int
}

// Compare holds got against want. Outputs agree when bit-identical (NaN
// agrees with NaN) or, when exact is false, within bound; classes must agree
// wherever the reference's top two outputs are further apart than 2×bound.
func Compare(want, got []float64, wantCls, gotCls []int, k int, exact bool, bound float64) Mismatch {
	m := Mismatch{FirstRow: -1, Rows: len(want) / k}
	if len(got) != len(want) {
		m.FirstRow, m.FirstOutput = 0, -1
		return m
	}
	for r := 0; r < m.Rows; r++ {
		rowOK := true
		for j := 0; j < k; j++ {
			w, g := want[r*k+j], got[r*k+j]
			same := math.Float64bits(w) == math.Float64bits(g) || math.IsNaN(w) && math.IsNaN(g)
			d := math.Abs(w - g)
			if !same && !math.IsNaN(d) {
				m.MaxAbsDiff = max(m.MaxAbsDiff, d)
			}
			ok := same || !exact && d <= bound
			if !ok {
				rowOK = false
				if m.FirstRow < 0 {
					m.FirstRow, m.FirstOutput, m.Got, m.Want = r, j, g, w
				}
			}
		}
		if wantCls != nil && !exact && margin(want[r*k:(r+1)*k]) <= 2*bound {
			m.Open++
		}
		if wantCls != nil {
			if gotCls == nil || len(gotCls) != len(wantCls) {
				m.LabelMismatch++
				rowOK = false
			} else if gotCls[r] != wantCls[r] && (exact || margin(want[r*k:(r+1)*k]) > 2*bound) {
				m.LabelMismatch++
				rowOK = false
				if m.FirstRow < 0 {
					m.FirstRow, m.FirstOutput, m.GotCls, m.WantCl = r, -1, gotCls[r], wantCls[r]
				}
			}
		}
		if rowOK {
			m.Exact++
		}
	}
	return m
}

// margin is the gap between the two largest outputs (for one logistic
// output, its distance from 0.5).
func margin(v []float64) float64 {
	if len(v) == 1 {
		return math.Abs(v[0] - 0.5)
	}
	a, b := math.Inf(-1), math.Inf(-1)
	for _, x := range v {
		if x > a {
			a, b = x, a
		} else if x > b {
			b = x
		}
	}
	return a - b
}

// OK reports whether every row agreed.
func (m Mismatch) OK() bool { return m.FirstRow < 0 && m.LabelMismatch == 0 }

func (m Mismatch) String() string {
	if m.OK() {
		return fmt.Sprintf("%d rows agree (max |diff| %g)", m.Rows, m.MaxAbsDiff)
	}
	if m.FirstOutput == -1 && m.GotCls == m.WantCl {
		return "output count differs from the reference"
	}
	if m.FirstOutput == -1 {
		return fmt.Sprintf("row %d: class %d, want %d (%d label mismatches)", m.FirstRow, m.GotCls, m.WantCl, m.LabelMismatch)
	}
	return fmt.Sprintf("row %d, output %d: got %v (%#x), want %v (%#x); %d of %d rows agree, max |diff| %g, %d label mismatches",
		m.FirstRow, m.FirstOutput, m.Got, math.Float64bits(m.Got), m.Want, math.Float64bits(m.Want),
		m.Exact, m.Rows, m.MaxAbsDiff, m.LabelMismatch)
}

// ErrSkip is returned by a runner whose toolchain or engine is not present
// on this machine; the harness reports it plainly.
var ErrSkip = errors.New("not available here")

// ErrDeclined is returned (wrapped) by a runner whose target cannot
// represent a model at all, such as float C for leaves beyond float's range;
// the emitter refuses such a model with a clear error of its own, tested
// there. It wraps ErrSkip, but unlike an absent engine it is no failure
// under SAWMILL_REQUIRE_ENGINES.
var ErrDeclined = fmt.Errorf("%w: the target cannot represent this model", ErrSkip)

// declined maps a target's refusal of a construct it cannot write
// (emit.Unsupported) to ErrDeclined; other errors pass unchanged.
func declined(err error) error {
	var u *emit.Unsupported
	if errors.As(err, &u) {
		return fmt.Errorf("%w: %v", ErrDeclined, err)
	}
	return err
}
