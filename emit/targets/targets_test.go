package targets

import (
	"slices"
	"testing"
)

// TestRegistry: names are unique, every runner name leads back to its
// target, and the float build is C's alone.
func TestRegistry(t *testing.T) {
	names := Names()
	if !slices.Equal(names, []string{"go", "c", "sql"}) {
		t.Errorf("targets %v, want go, c, sql", names)
	}
	for _, r := range Runners() {
		tg, ok := Runs(r)
		if !ok {
			t.Errorf("runner %q runs no target", r)
			continue
		}
		if f, _ := Find(tg.Name); f.Name != tg.Name {
			t.Errorf("runner %q: target %q not found by name", r, tg.Name)
		}
	}
	if tg, _ := Runs("postgres"); tg.Name != "sql" {
		t.Errorf("postgres runs %q, want sql", tg.Name)
	}
	for _, tg := range All() {
		if len(tg.Layouts) == 0 {
			t.Errorf("%s: no layouts", tg.Name)
		}
		if got := tg.CompileOptions(true).SingleInputs; got != (tg.Name == "c") {
			t.Errorf("%s: float build compiles with SingleInputs %v", tg.Name, got)
		}
	}
}
