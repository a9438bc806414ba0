package ctarget

import (
	"fmt"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// ctFiles emits a golden case in constant time and returns NAME.h and NAME.c.
func ctFiles(t *testing.T, name string, o Options) (string, string) {
	t.Helper()
	f, err := forest.ReadFile(filepath.Join("..", "..", "golden", "testdata", name, "model.json"))
	if err != nil {
		t.Fatal(err)
	}
	p, _, err := compile.Compile(f, Target().CompileOptions(o.Float))
	if err != nil {
		t.Fatal(err)
	}
	files, err := Emit(p, o)
	if err != nil {
		t.Fatal(err)
	}
	return string(files[0].Data), string(files[1].Data)
}

// The header states the splits a prediction tests: at most WorstSplits in
// every layout, exactly that many in constant time, with the bin search's
// comparisons counted feature by feature from the cut table; and it names
// inspect --c-sizes for what a compiler must measure.
func TestConstantTimeHeader(t *testing.T) {
	for _, name := range []string{"trained-wine", "sklearn-breast-cancer", "edge-single-leaf"} {
		f, err := forest.ReadFile(filepath.Join("..", "..", "golden", "testdata", name, "model.json"))
		if err != nil {
			t.Fatal(err)
		}
		p, _, err := compile.Compile(f, compile.Options{})
		if err != nil {
			t.Fatal(err)
		}
		plainH, _ := ctFiles(t, name, Options{Layout: emit.Binned})
		if want := fmt.Sprintf("At most %d splits are tested per prediction", WorstSplits(p)); !strings.Contains(plainH, want) {
			t.Errorf("%s: the header does not say %q", name, want)
		}
		h, c := ctFiles(t, name, Options{ConstantTime: true})
		if want := fmt.Sprintf("every prediction tests exactly %d splits", WorstSplits(p)); !strings.Contains(h, want) {
			t.Errorf("%s: the constant-time header does not say %q", name, want)
		}
		for _, s := range []string{plainH, h} {
			if !strings.Contains(s, "sawmill inspect --c-sizes") {
				t.Errorf("%s: the header does not name inspect --c-sizes", name)
			}
		}
		// The comparisons of the mapping, from the cut bases in NAME.c.
		m := regexp.MustCompile(`(?s)_cut_base\[\d+\] = \{\s*([0-9, \n\t]*)\}`).FindStringSubmatch(c)
		if m == nil {
			t.Fatalf("%s: no cut_base table", name)
		}
		var base []int
		for _, s := range strings.FieldsFunc(m[1], func(r rune) bool { return r == ',' || r == ' ' || r == '\n' || r == '\t' }) {
			var v int
			fmt.Sscan(s, &v)
			base = append(base, v)
		}
		compares, used := 0, 0
		for i := 0; i+1 < len(base); i++ {
			if n := base[i+1] - base[i]; n > 0 {
				used++
				steps := 1 // the last comparison
				for ; n > 1; n -= n / 2 {
					steps++
				}
				compares += steps
			}
		}
		if want := fmt.Sprintf("%d used features to bins in exactly %d comparisons", used, compares); !strings.Contains(strings.Join(strings.Fields(strings.ReplaceAll(h, " * ", " ")), " "), want) {
			t.Errorf("%s: the constant-time header does not say %q", name, want)
		}
	}
}

// The constant-time C walks each tree its depth (a loop over the depth
// table, no break) and has none of the binned walk's data-dependent
// branches.
func TestConstantTimeCode(t *testing.T) {
	for _, float := range []bool{false, true} {
		_, plain := ctFiles(t, "v2-missing-value-999-float32", Options{Layout: emit.Binned, Float: float})
		_, c := ctFiles(t, "v2-missing-value-999-float32", Options{ConstantTime: true, Float: float})
		for _, s := range []string{"break;", "if (" + "model_is_nan", "while (lo < hi)"} {
			if !strings.Contains(plain, s) {
				t.Errorf("float=%v: the binned walk has no %q: the check below tests nothing", float, s)
			}
			if strings.Contains(c, s) {
				t.Errorf("float=%v: constant-time C has %q", float, s)
			}
		}
		for _, s := range []string{"model_depth[", "for (s = model_depth[t]; s != 0u; s--)", "model_sel32(", "model_lt32("} {
			if !strings.Contains(c, s) {
				t.Errorf("float=%v: constant-time C has no %q", float, s)
			}
		}
		// Every if from the bins to the end of predict tests the tables,
		// not the input (the model has no transform).
		walk := c[strings.Index(c, "static void model_bins"):strings.Index(c, "void model_predict_batch")]
		for _, line := range strings.Split(walk, "\n") {
			if i := strings.Index(line, "if ("); i >= 0 && !strings.Contains(line, "len == 0u") && !strings.Contains(line, "_out[") {
				t.Errorf("float=%v: a test in constant-time C: %s", float, strings.TrimSpace(line))
			}
		}
	}
}
