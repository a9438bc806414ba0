package golden

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
	"github.com/sawmill-dev/sawmill/verify"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/targets"
)

var update = flag.Bool("update", false, "rewrite snapshot files that differ")

func TestMain(m *testing.M) {
	flag.Parse()
	os.Exit(m.Run())
}

// TestGolden runs every case through every runner, variant and layout and
// holds each row against the interpreter, and against scikit-learn's
// recorded outputs where the case has them.
func TestGolden(t *testing.T) {
	cases, err := goldencase.Cases("testdata")
	if err != nil {
		t.Fatal(err)
	}
	if len(cases) == 0 {
		t.Fatal("no golden cases found under testdata")
	}
	wantFiles := map[string]bool{} // snapshot files some case produced
	for _, c := range cases {
		t.Run(c.Name, func(t *testing.T) {
			if c.WantErr != "" {
				if c.LoadErr == nil {
					t.Fatalf("loaded, want error %q", c.WantErr)
				}
				got := strings.ReplaceAll(c.LoadErr.Error(), filepath.ToSlash(c.Dir)+"/", "")
				if strings.TrimSpace(got) != strings.TrimSpace(c.WantErr) {
					t.Fatalf("error:\n%s\nwant:\n%s", got, c.WantErr)
				}
				return
			}
			if c.Flags.Slow && testing.Short() {
				t.Skip("slow case: runs without -short")
			}
			checkSklearnReference(t, c)
			for _, r := range verify.RunnersWith(runnerConfig) {
				if len(c.Flags.Runners) > 0 && !slices.Contains(c.Flags.Runners, r.Name()) {
					continue
				}
				for _, variant := range r.Variants() {
					for _, layout := range verify.LayoutsOf(r, variant) {
						if slices.Contains(c.Flags.SkipLayouts, layout) {
							continue
						}
						name := r.Name() + "/" + layout
						if variant != "" {
							name += "-" + variant
						}
						t.Run(name, func(t *testing.T) {
							runOne(t, c, r, layout, variant, wantFiles)
						})
					}
				}
			}
		})
	}
	checkOrphanSnapshots(t, cases, wantFiles)
}

func runOne(t *testing.T, c *goldencase.Case, r verify.Runner, layout, variant string, wantFiles map[string]bool) {
	skipSparkFunction(t, r.Name(), variant, c.Name)
	p, _, err := compile.Compile(c.Model, r.CompileOptions(variant))
	if err != nil {
		t.Fatalf("compile: %v", err)
	}
	// The sqlite3 shell variants run the text the embedded engine's snapshot
	// keeps, and the cross runners (boards, arm64) the text of their
	// target's own runner.
	if c.Flags.Snapshot && !strings.HasSuffix(variant, "shell") && slices.Contains(targets.Runners(), r.Name()) {
		if e, ok := r.(verify.Emitter); ok {
			checkSnapshot(t, c, e, p, r.Name(), layout, variant, wantFiles)
		}
	}
	res, err := r.Score(context.Background(), p, layout, variant, c.Rows, t.TempDir())
	if errors.Is(err, verify.ErrSkip) {
		if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" && !errors.Is(err, verify.ErrDeclined) {
			t.Fatalf("%s: %v, and SAWMILL_REQUIRE_ENGINES is set", r.Name(), err)
		}
		t.Skipf("skipped: %s: %v", r.Name(), err)
	}
	if err != nil {
		t.Fatalf("%s %s: %v", r.Name(), layout, err)
	}
	want, wantCls := c.ReferenceFor(r, variant)
	exact, bound := r.Tolerance(variant, p)
	m := verify.Compare(want, res.Outputs, wantCls, res.Classes, c.Model.NumOutputs(), exact, bound)
	if !m.OK() {
		t.Fatalf("%s %s %s: %s", r.Name(), layout, variant, m)
	}
	t.Logf("%s; build %v, run %v", m, res.Build.Round(1e6), res.Run.Round(1e6))
	if c.Sklearn != nil && exact {
		c.CheckSklearn(t, res.Outputs, "emitted "+r.Name())
	}
}

// checkSklearnReference holds the interpreter against scikit-learn's
// recorded predict_proba (scikit-learn 1.2.1, Debian python3-sklearn),
// within 1e-12.
func checkSklearnReference(t *testing.T, c *goldencase.Case) {
	if c.Sklearn == nil {
		return
	}
	want, _ := c.Reference()
	c.CheckSklearn(t, want, "interpreter")
}

func snapshotDir(c *goldencase.Case, runner, layout, variant string) string {
	d := layout
	if variant != "" {
		d += "-" + variant
	}
	return filepath.Join(c.Dir, "want", runner, d)
}

// checkSnapshot compares the generated files with the kept ones, rewriting
// only those that differ under -update.
func checkSnapshot(t *testing.T, c *goldencase.Case, e verify.Emitter, p *compile.Program, runner, layout, variant string, wantFiles map[string]bool) {
	files, err := e.Emit(p, layout, variant)
	if errors.Is(err, verify.ErrDeclined) {
		return // Score says why
	}
	if err != nil {
		t.Fatalf("emit: %v", err)
	}
	dir := snapshotDir(c, runner, layout, variant)
	for _, f := range files {
		path := filepath.Join(dir, f.Name)
		wantFiles[path] = true
		old, err := os.ReadFile(path)
		if err == nil && bytes.Equal(old, f.Data) {
			continue
		}
		if *update {
			if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(path, f.Data, 0o644); err != nil {
				t.Fatal(err)
			}
			t.Logf("updated %s", path)
			continue
		}
		if err != nil {
			t.Errorf("%s: no snapshot (run go test ./golden -update and review the diff)", path)
			continue
		}
		t.Errorf("%s differs from the generated file (-want +got):\n%s", path, lineDiff(string(old), string(f.Data)))
	}
}

// checkOrphanSnapshots fails on kept files that no case produced.
func checkOrphanSnapshots(t *testing.T, cases []*goldencase.Case, produced map[string]bool) {
	if t.Failed() || testing.Short() || flag.Lookup("test.run").Value.String() != "" {
		return // a failed, short or filtered run produces only part of the files
	}
	for _, c := range cases {
		root := filepath.Join(c.Dir, "want")
		filepath.Walk(root, func(path string, info os.FileInfo, err error) error {
			if err != nil || info.IsDir() {
				return nil
			}
			if !produced[path] {
				t.Errorf("%s: snapshot file that no case produced", path)
			}
			return nil
		})
	}
}

// lineDiff is a small -want +got diff: common prefix and suffix lines are
// dropped and the differing middle shown.
func lineDiff(want, got string) string {
	a, b := strings.Split(want, "\n"), strings.Split(got, "\n")
	i := 0
	for i < len(a) && i < len(b) && a[i] == b[i] {
		i++
	}
	j := 0
	for j < len(a)-i && j < len(b)-i && a[len(a)-1-j] == b[len(b)-1-j] {
		j++
	}
	var s strings.Builder
	fmt.Fprintf(&s, "@@ line %d @@\n", i+1)
	for _, l := range a[i : len(a)-j] {
		s.WriteString("-" + l + "\n")
	}
	for _, l := range b[i : len(b)-j] {
		s.WriteString("+" + l + "\n")
	}
	return s.String()
}

// runnerConfig holds the runners to more than a user's machine needs:
// generated C must build without a warning, and in CI
// (SAWMILL_REQUIRE_ENGINES) with gcc, clang and g++ all present; and every
// case runs on the boards under QEMU too.
var runnerConfig = verify.Config{Werror: true, AllCompilers: os.Getenv("SAWMILL_REQUIRE_ENGINES") != "", Boards: true}
