package testenv

import (
	"errors"
	"testing"
)

// recorder stands in for a *testing.T and records how the test ended.
type recorder struct {
	testing.TB
	failed, skipped bool
	msg             string
}

func (r *recorder) Helper() {}
func (r *recorder) Fatalf(format string, args ...any) {
	r.failed = true
	r.msg = format
}
func (r *recorder) Skipf(format string, args ...any) {
	r.skipped = true
	r.msg = format
}

func TestNeed(t *testing.T) {
	for _, required := range []string{"", "1"} {
		t.Setenv("SAWMILL_REQUIRE_ENGINES", required)
		r := &recorder{}
		Need(r, nil)
		if r.failed || r.skipped {
			t.Fatalf("required=%q: a nil error ended the test", required)
		}
		Need(r, errors.New("no engine"))
		if required != "" && (!r.failed || r.skipped) {
			t.Errorf("required: got failed=%v skipped=%v, want a failure", r.failed, r.skipped)
		}
		if required == "" && (r.failed || !r.skipped) {
			t.Errorf("not required: got failed=%v skipped=%v, want a skip", r.failed, r.skipped)
		}
	}
}

func TestToolMissing(t *testing.T) {
	t.Setenv("SAWMILL_REQUIRE_ENGINES", "1")
	r := &recorder{}
	Tool(r, "sawmill-no-such-program", "nowhere")
	if !r.failed {
		t.Fatal("a missing program did not fail the test under SAWMILL_REQUIRE_ENGINES")
	}
}
