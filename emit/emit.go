// Package emit holds what every target shares: the File type emitters
// return, the sawmill version named in headers, layout names, and the
// identifier and number helpers. Each target is a sub-package (emit/gotarget,
// emit/ctarget, emit/sqltarget) with a pure function
//
//	Emit(p *compile.Program, o Options) ([]emit.File, error)
//
// that never touches the disk: only the command line writes files.
package emit

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"unicode"

	"github.com/sawmill-dev/sawmill/compile"
)

// Version is the sawmill version a generated header names when the
// target's Options.Version is empty. Golden tests set Options.Version to
// "test" so that a release does not rewrite every snapshot.
const Version = "0.1.0"

// HeaderVersion is the version a header names: v, or Version when v is
// empty.
func HeaderVersion(v string) string {
	if v == "" {
		return Version
	}
	return v
}

// Ownership is the line every generated file's header carries after the
// generated-code line: the output is the user's, and sawmill's licence
// (Apache 2.0, which covers sawmill's own source) puts no terms on it.
const Ownership = "The generated code is yours: it carries no licence terms of sawmill's."

// File is one generated file: a name relative to the output folder, and its
// bytes.
type File struct {
	Name string
	Data []byte
}

// Layout names, shared by every target.
const (
	Auto       = "auto"       // pick by node count and depth
	Nested     = "nested"     // if/else (or CASE) per tree
	Table      = "table"      // constant arrays walked by one loop
	Branchless = "branchless" // implicit-heap descent for bounded depth
	Binned     = "binned"     // inputs mapped to integer bins once, trees compare integers
)

// Float formats a finite float64 as the shortest decimal that reads back as
// the same value ("-0" for negative zero, exponent form "1e+300" for large
// magnitudes). Targets needing another spelling adapt it; NaN and ±Inf are
// not literals in any target and panic as a BUG.
func Float(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		panic(fmt.Sprintf("BUG: emit.Float(%v): not a finite number", v))
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// Float32 formats a value that is exactly a float32 as the shortest decimal
// that reads back as that float32.
func Float32(v float64) string {
	f := float32(v)
	if float64(f) != v || math.IsInf(v, 0) || math.IsNaN(v) {
		panic(fmt.Sprintf("BUG: emit.Float32(%v): not a finite float32 value", v))
	}
	return strconv.FormatFloat(float64(f), 'g', -1, 32)
}

// Identifiers makes one valid, unique identifier per name for a language
// whose identifiers are ASCII letters, digits and underscores not starting
// with a digit. Runs of other characters become one underscore, a leading
// digit or an empty result gets prefix, names in reserved (compared as is)
// and repeats get a numeric suffix, so distinct names always stay distinct
// and the mapping depends only on the list, never on map order.
func Identifiers(names []string, prefix string, reserved map[string]bool) []string {
	out := make([]string, len(names))
	taken := map[string]bool{}
	for i, n := range names {
		base := sanitize(n, prefix)
		id := base
		for k := 2; taken[id] || reserved[id]; k++ {
			id = fmt.Sprintf("%s_%d", base, k)
		}
		taken[id] = true
		out[i] = id
	}
	return out
}

func sanitize(name, prefix string) string {
	var b strings.Builder
	under := false
	for _, r := range name {
		if r < unicode.MaxASCII && (unicode.IsLetter(r) || unicode.IsDigit(r)) {
			b.WriteRune(r)
			under = false
		} else if !under {
			b.WriteByte('_')
			under = true
		}
	}
	s := strings.Trim(b.String(), "_")
	if s == "" || s[0] >= '0' && s[0] <= '9' {
		s = prefix + s
	}
	return s
}

// CommentSafe makes text safe inside a line or block comment of C-like
// languages and SQL: no line breaks, no "*/", no "/*", no "--" left intact,
// and no non-printable characters. It is for display only.
func CommentSafe(s string) string {
	var b strings.Builder
	for _, r := range s {
		switch {
		case r == '\\':
			b.WriteString(`\\`) // a trailing backslash would continue a C line comment
		case r == '\n' || r == '\r' || r == '\u2028' || r == '\u2029':
			b.WriteString(`\n`)
		case !unicode.IsPrint(r):
			fmt.Fprintf(&b, `\u%04x`, r)
		default:
			b.WriteRune(r)
		}
	}
	s = b.String()
	s = strings.ReplaceAll(s, "*/", "* /")
	s = strings.ReplaceAll(s, "/*", "/ *")
	s = strings.ReplaceAll(s, "--", "- -")
	s = strings.ReplaceAll(s, "??", "? ?") // C trigraphs
	return s
}

// Target is what the command line and the verifier know of every target,
// the same for each; the registry (emit/targets) lists one per target
// package, and each package's Emit, Resolve and Options do the rest.
type Target struct {
	// Name is the --target value and the name in reports ("go", "c",
	// "sql").
	Name string
	// Layouts are the layouts Emit writes besides Auto.
	Layouts []string
	// Float reports whether the target has a build for float32 inputs
	// (C's float API), for which the program is compiled with
	// SingleInputs.
	Float bool
	// Engines name the verifier's runners that run the target's code when
	// they are not named like the target (SQL's sqlite, duckdb and
	// postgres); nil means one runner named Name.
	Engines []string
	// Emit is the package's Emit with the settings every target
	// understands; a caller that needs a target's own options (Go's sample
	// rows, SQL's dialect) calls the package.
	Emit func(p *compile.Program, s Settings) ([]File, error)
}

// Settings are the options every target understands, for callers that
// treat targets alike.
type Settings struct {
	// Layout is Auto ("" too) or one of the target's Layouts.
	Layout string
	// Name names what is emitted: Go's package, C's NAME.h, NAME.c and
	// NAME_ prefix, SQL's NAME.sql; "" leaves the target's default.
	Name string
	// Float asks for the float32-input build of a target that has one.
	Float bool
	// Comments is the comment knob (NodeComments).
	Comments int
}

// CompileOptions are the compile.Options a build of t needs: SingleInputs
// for its float32-input build (float set, and t.Float), none otherwise.
func (t Target) CompileOptions(float bool) compile.Options {
	return compile.Options{SingleInputs: t.Float && float}
}

// UnknownLayout is the error every target gives for a layout it does not
// have.
func UnknownLayout(target, layout string, layouts []string) error {
	return fmt.Errorf("%s: layout %q is unknown\nhint: use %s", target, layout, strings.Join(append([]string{Auto}, layouts...), ", "))
}
