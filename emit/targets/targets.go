// Package targets is the one list of sawmill's targets, which the command
// line and the verifier iterate. A new target is a package under emit/
// exporting a Target (see emit.Target), one line in All, and its runner in
// verify.RunnersWith.
package targets

import (
	"slices"

	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
)

// All lists every target, in the order help texts and reports name them.
func All() []emit.Target {
	return []emit.Target{
		gotarget.Target(),
		ctarget.Target(),
		sqltarget.Target(),
	}
}

// Names are the targets' names, in All's order.
func Names() []string {
	var out []string
	for _, t := range All() {
		out = append(out, t.Name)
	}
	return out
}

// Find is the target named name.
func Find(name string) (emit.Target, bool) {
	for _, t := range All() {
		if t.Name == name {
			return t, true
		}
	}
	return emit.Target{}, false
}

// Runs is the target whose code the verifier's runner named runner runs:
// the target of that name, or the one listing it among its Engines.
func Runs(runner string) (emit.Target, bool) {
	for _, t := range All() {
		if t.Name == runner || slices.Contains(t.Engines, runner) {
			return t, true
		}
	}
	return emit.Target{}, false
}

// Runners are the verifier's runner names of every target, in All's order:
// a target's Engines, or its own name.
func Runners() []string {
	var out []string
	for _, t := range All() {
		if t.Engines != nil {
			out = append(out, t.Engines...)
		} else {
			out = append(out, t.Name)
		}
	}
	return out
}
