package gotarget

import (
	"bytes"
	"go/format"
	"math"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// program parses a Program in compile's text form.
func program(t *testing.T, text string) *compile.Program {
	t.Helper()
	p, err := compile.Parse(text)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

const small = `program classification outputs=3 combine=average transform=none compare=double base=0,0,0
feature "vibration_rms" used
feature "bearing_temp_c" used
class "healthy"
class "cavitation"
class "bearing_wear"
tree 0
  0 #0 x1 <= 61.5 missing=left ? 1 : 2
  1 #1 leaf 0.9,0.1,-0
  2 #2 x0 < 0.25 missing=right ? 3 : 4
  3 #3 leaf 0.2,0.3,0.5
  4 #4 leaf 0,0,1
`

var allLayouts = []string{emit.Nested, emit.Table, emit.Branchless}

func TestEmitDeterministicAndFormatted(t *testing.T) {
	p := program(t, small)
	for _, l := range allLayouts {
		a, err := Emit(p, Options{Layout: l})
		if err != nil {
			t.Fatal(err)
		}
		b, err := Emit(p, Options{Layout: l})
		if err != nil {
			t.Fatal(err)
		}
		if len(a) != 2 || a[0].Name != SourceFile || a[1].Name != TestFile {
			t.Fatalf("%s: files %v", l, names(a))
		}
		for i := range a {
			if !bytes.Equal(a[i].Data, b[i].Data) {
				t.Errorf("%s: %s differs between two emissions", l, a[i].Name)
			}
			f, err := format.Source(a[i].Data)
			if err != nil || !bytes.Equal(f, a[i].Data) {
				t.Errorf("%s: %s is not gofmt-stable (%v)", l, a[i].Name, err)
			}
		}
	}
}

func names(fs []emit.File) []string {
	var s []string
	for _, f := range fs {
		s = append(s, f.Name)
	}
	return s
}

func TestPackageName(t *testing.T) {
	p := program(t, small)
	for _, bad := range []string{"main", "_", "2nd", "a-b", "func", "naïve space", "x y"} {
		if _, err := Emit(p, Options{Package: bad}); err == nil {
			t.Errorf("package %q accepted", bad)
		}
	}
	fs, err := Emit(p, Options{Package: "pumphealth"})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range fs {
		if !bytes.Contains(f.Data, []byte("\npackage pumphealth\n")) {
			t.Errorf("%s does not declare package pumphealth", f.Name)
		}
	}
}

func TestRejectsUnloweredPrograms(t *testing.T) {
	p := program(t, small)
	p.Compare = compile.Round32
	if _, err := Emit(p, Options{}); err == nil || !strings.HasPrefix(err.Error(), "BUG:") {
		t.Errorf("round32 program: %v, want a BUG error", err)
	}
	p.Compare = compile.Single
	if _, err := Emit(p, Options{}); err == nil || !strings.Contains(err.Error(), "hint:") {
		t.Errorf("single program: %v, want an error with a hint", err)
	}
	p = program(t, small)
	if _, err := Emit(p, Options{Layout: "spiral"}); err == nil {
		t.Error("unknown layout accepted")
	}
}

// TestNegativeZeroLiteral: Go reads the constant -0.0 as +0 (the spec's
// constant arithmetic is exact and has no signed zero), so -0 must never be
// written as a constant.
func TestNegativeZeroLiteral(t *testing.T) {
	p := program(t, small)
	fs, err := Emit(p, Options{Layout: emit.Nested})
	if err != nil {
		t.Fatal(err)
	}
	src := string(fs[0].Data)
	if strings.Contains(src, "-0.0") || !strings.Contains(src, "negZero") {
		t.Errorf("-0 leaf not spelled through negZero:\n%s", src)
	}
	g := newGen(p, Options{}, "model", emit.Nested)
	for _, v := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		func() {
			defer func() {
				if r := recover(); r == nil || !strings.HasPrefix(r.(string), "BUG:") {
					t.Errorf("literal %v: recovered %v, want a BUG panic", v, r)
				}
			}()
			g.float(v)
		}()
	}
}

// chainProgram is one tree: a chain of depth splits, each left child a leaf.
func chainProgram(depth int) *compile.Program {
	p := &compile.Program{Task: forest.Regression, Features: []compile.Feature{{Name: "x", Used: true}},
		NumOutputs: 1, Combine: forest.Sum, BaseScore: []float64{0}, Transform: forest.NoTransform, Compare: compile.Double}
	var nodes []compile.Node
	for i := 0; i < depth; i++ {
		at := int32(len(nodes))
		nodes = append(nodes,
			compile.Node{Feature: 0, Op: compile.LE, Threshold: float64(i), MissingLeft: i%2 == 0, Left: at + 1, Right: at + 2, ID: at},
			compile.Node{Feature: -1, Left: -1, Right: -1, Value: []float64{float64(i)}, ID: at + 1})
	}
	nodes = append(nodes, compile.Node{Feature: -1, Left: -1, Right: -1, Value: []float64{-1}, ID: int32(len(nodes))})
	p.Trees = []compile.Tree{{Nodes: nodes}}
	return p
}

func TestChooseLayout(t *testing.T) {
	if l := layoutOf(program(t, small)); l != emit.Nested {
		t.Errorf("one small tree: %s, want nested", l)
	}
	if l := layoutOf(chainProgram(100)); l != emit.Nested {
		t.Errorf("100-deep chain: %s, want nested", l)
	}
	if l := layoutOf(chainProgram(100_000)); l != emit.Table {
		t.Errorf("100,000-deep chain: %s, want table", l)
	}
	p := chainProgram(10)
	for range 4 {
		p.Trees = append(p.Trees, p.Trees[0])
	}
	if l := layoutOf(p); l != emit.Table {
		t.Errorf("five trees: %s, want table", l)
	}
}

// TestNestedDepthBounded: the nested layout nests only the smaller child, so
// a deep chain emits flat code (nesting depth 1) without deep recursion.
func TestNestedDepthBounded(t *testing.T) {
	fs, err := Emit(chainProgram(20_000), Options{Layout: emit.Nested, NoTest: true})
	if err != nil {
		t.Fatal(err)
	}
	deepest := 0
	for _, line := range strings.Split(string(fs[0].Data), "\n") {
		deepest = max(deepest, len(line)-len(strings.TrimLeft(line, "\t")))
	}
	if deepest > 3 {
		t.Errorf("20,000-deep chain nested %d tabs deep, want at most 3", deepest)
	}
}

// TestTestRowsReachTheirLeaves: every row built from a path reaches the
// leaf it was built for, thresholds themselves included.
func TestTestRowsReachTheirLeaves(t *testing.T) {
	p := chainProgram(50)
	p.Trees[0].Nodes[0].Op = compile.LT
	for leaf := range p.Trees[0].Nodes {
		if !p.Trees[0].Nodes[leaf].IsLeaf() {
			continue
		}
		x, ok := rowReaching(p, &p.Trees[0], int32(leaf))
		if !ok {
			t.Errorf("no row found for leaf %d", leaf)
			continue
		}
		if got := reached(&p.Trees[0], x); got != int32(leaf) {
			t.Errorf("row %v for leaf %d reaches %d", x, leaf, got)
		}
	}
	// Only NaN reaches a leaf behind x <= 1 then x > 2 when both send
	// missing values that way.
	q := program(t, `program regression outputs=1 combine=sum transform=none compare=double base=0
feature "x" used
tree 0
  0 #0 x0 <= 1 missing=left ? 1 : 4
  1 #1 x0 <= 2 missing=right ? 2 : 3
  2 #2 leaf 1
  3 #3 leaf 2
  4 #4 leaf 3
`)
	x, ok := rowReaching(q, &q.Trees[0], 3)
	if !ok || !math.IsNaN(x[0]) {
		t.Errorf("leaf reachable only by NaN: row %v, %v", x, ok)
	}
}

func TestTableNarrowTypes(t *testing.T) {
	d := buildTable(program(t, small), nil)
	if d.featType != "uint8" || d.farType != "uint8" || !d.negated || d.width != 4 {
		t.Errorf("feat %s far %s negated %v width %d", d.featType, d.farType, d.negated, d.width)
	}
	d = buildTable(chainProgram(40_000), nil)
	if d.farType != "uint32" {
		t.Errorf("far offsets up to 80,000: %s, want uint32", d.farType)
	}
}

// layoutOf is the layout auto picks for p.
func layoutOf(p *compile.Program) string {
	l, _, err := Resolve(p, Options{})
	if err != nil {
		panic(err)
	}
	return l
}
