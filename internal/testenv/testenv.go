// Package testenv decides what a test does when a tool or an engine it
// needs is missing: on a user's machine it skips with a plain message; where
// SAWMILL_REQUIRE_ENGINES is set (CI sets it) it fails, so that no check CI
// should run is skipped there unseen.
package testenv

import (
	"fmt"
	"os"
	"os/exec"
	"testing"
)

// Required reports whether SAWMILL_REQUIRE_ENGINES is set: every engine and
// toolchain must then be present.
func Required() bool { return os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" }

// Need does nothing when err is nil; otherwise it fails t if engines are
// required and skips it if not, with err as the reason either way.
func Need(t testing.TB, err error) {
	t.Helper()
	if err == nil {
		return
	}
	if Required() {
		t.Fatalf("%v, and SAWMILL_REQUIRE_ENGINES is set", err)
	} else {
		t.Skipf("skipped: %v", err)
	}
}

// Tool returns the path of the program name, or skips or fails t as Need
// does; hint (may be empty) says where to get it, e.g. "Debian package
// qemu-user".
func Tool(t testing.TB, name, hint string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if hint != "" {
			err = fmt.Errorf("%s is not on PATH (%s)", name, hint)
		} else {
			err = fmt.Errorf("%s is not on PATH", name)
		}
	}
	Need(t, err)
	return p
}
