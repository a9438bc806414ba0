package targets

import (
	"slices"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
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

// TestSamePreconditions: every target emits a small program through its
// registry entry, refuses one compiled for the wrong inputs in the same
// words (emit.CheckProgram), and a layout it does not have likewise.
func TestSamePreconditions(t *testing.T) {
	f, err := forest.ReadFile("../../golden/testdata/edge-softmax/model.json")
	if err != nil {
		t.Fatal(err)
	}
	double, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	single, _, err := compile.Compile(f, compile.Options{SingleInputs: true})
	if err != nil {
		t.Fatal(err)
	}
	for _, tg := range All() {
		files, err := tg.Emit(double, emit.Settings{})
		if err != nil || len(files) == 0 {
			t.Errorf("%s: %d files, %v", tg.Name, len(files), err)
		}
		_, err = tg.Emit(single, emit.Settings{})
		if want := tg.Name + ": the program was compiled for float32 inputs, and this build takes float64 inputs"; err == nil || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("%s: %v, want %q", tg.Name, err, want)
		}
		_, err = tg.Emit(double, emit.Settings{Layout: "sideways"})
		if want := tg.Name + `: layout "sideways" is unknown`; err == nil || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("%s: %v, want %q", tg.Name, err, want)
		}
		if tg.Float {
			if _, err := tg.Emit(single, emit.Settings{Float: true}); err != nil {
				t.Errorf("%s float build: %v", tg.Name, err)
			}
		}
	}
}

// TestNodeComments: the one comment knob, 0 deciding by size.
func TestNodeComments(t *testing.T) {
	f, err := forest.ReadFile("../../golden/testdata/edge-softmax/model.json")
	if err != nil {
		t.Fatal(err)
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !emit.NodeComments(0, p) || !emit.NodeComments(1, p) || emit.NodeComments(-1, p) {
		t.Errorf("a %d-node program: knob 0, 1, -1 give %v, %v, %v; want true, true, false",
			p.NumNodes(), emit.NodeComments(0, p), emit.NodeComments(1, p), emit.NodeComments(-1, p))
	}
}
