package verify

import (
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// TestCSelftest builds NAME_selftest.c with the model's own C and gcc, and
// expects NAME_selftest() to return 0; then changes one leaf of tree 0 the
// probes reach (in the program only, the probes keep the model's outputs)
// and expects the 1-based number of the first probe row that reaches it.
// Double and float C, nested and table.
func TestCSelftest(t *testing.T) {
	testenv.Tool(t, "gcc", "")
	f := verifyWine(t)
	for _, float := range []bool{false, true} {
		probes := CSelftestProbes(f, float)
		require.NotEmpty(t, probes)
		require.LessOrEqual(t, len(probes), CSelftestRows)
		for _, layout := range []string{"nested", "table"} {
			o := ctarget.Options{Name: "wine", Layout: layout, Float: float}
			p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(float))
			require.NoError(t, err)
			require.Equal(t, 0, runCSelftest(t, p, o, probes), "float %v %s: untouched", float, layout)
			leaf := firstProgramLeaf(p)
			p.Trees[0].Nodes[leaf].Value[0] += 0.25
			want := 0
			for i, pr := range probes {
				x := pr.X
				if p.Leaf(&p.Trees[0], x) == nil {
					continue
				}
				if &p.Leaf(&p.Trees[0], x)[0] == &p.Trees[0].Nodes[leaf].Value[0] {
					want = i + 1
					break
				}
			}
			require.NotZero(t, want, "no probe row reaches tree 0's first leaf")
			require.Equal(t, want, runCSelftest(t, p, o, probes), "float %v %s: one leaf changed", float, layout)
		}
	}
}

// firstProgramLeaf is the index of tree 0's first leaf.
func firstProgramLeaf(p *compile.Program) int {
	for i, n := range p.Trees[0].Nodes {
		if n.IsLeaf() {
			return i
		}
	}
	panic("BUG: a tree without a leaf")
}

// runCSelftest emits p and its self-test, builds them with a main that
// prints NAME_selftest(), and returns what it printed.
func runCSelftest(t *testing.T, p *compile.Program, o ctarget.Options, probes []ctarget.Probe) int {
	t.Helper()
	dir := t.TempDir()
	_, err := writeC(p, o, dir)
	require.NoError(t, err)
	st, err := ctarget.Selftest(p, o, probes)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(filepath.Join(dir, st.Name), st.Data, 0o644))
	main := "#include <stdio.h>\nint " + o.Name + "_selftest(void);\nint main(void) { printf(\"%d\\n\", " + o.Name + "_selftest()); return 0; }\n"
	require.NoError(t, os.WriteFile(filepath.Join(dir, "main.c"), []byte(main), 0o644))
	args := append([]string{"-std=c99", "-O2"}, cRunner{Werror: true}.warnings()...)
	args = append(args, "-o", "st", "main.c", o.Name+".c", st.Name, "-lm")
	require.NoError(t, cCommand(context.Background(), dir, nil, nil, "gcc", args...))
	out, err := exec.Command(filepath.Join(dir, "st")).Output()
	var ee *exec.ExitError
	require.False(t, errors.As(err, &ee), "selftest binary failed")
	require.NoError(t, err)
	n, err := strconv.Atoi(string(out[:len(out)-1]))
	require.NoError(t, err)
	return n
}
