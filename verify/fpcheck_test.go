package verify

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// TestCFPCheck holds the emitted NAME_fp_check to what it promises on this
// machine's x86-64 with gcc: 0 as the C runtime starts; the flush bit when
// the program is linked with -ffast-math (gcc then links crtfastmath.o,
// which sets MXCSR's flush-to-zero and denormals-are-zero bits at start-up:
// gcc's documentation of -ffast-math); the rounding bit after
// fesetround(FE_UPWARD) and after fesetround(FE_TOWARDZERO) (C99 7.6.3).
// And the compile-time check: gcc -mfpmath=387 on x86-64 evaluates in
// long double (FLT_EVAL_METHOD 2, gcc's documentation of -mfpmath), which
// double C refuses with #error unless NAME_ALLOW_INEXACT_FP is defined.
func TestCFPCheck(t *testing.T) {
	testenv.Tool(t, "gcc", "")
	f, err := forest.ReadFile(filepath.Join(goldenCases, "edge-softmax", "model.json"))
	require.NoError(t, err)
	for _, float := range []bool{false, true} {
		p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(float))
		require.NoError(t, err)
		files, err := ctarget.Emit(p, ctarget.Options{Name: "m", Float: float})
		require.NoError(t, err)
		dir := t.TempDir()
		for _, fl := range files {
			require.NoError(t, os.WriteFile(filepath.Join(dir, fl.Name), fl.Data, 0o644))
			if strings.HasSuffix(fl.Name, ".c") {
				require.Contains(t, string(fl.Data), "#ifndef M_ALLOW_INEXACT_FP")
				require.Contains(t, string(fl.Data), "#if !defined(FLT_EVAL_METHOD)")
			}
		}
		main := `#include <fenv.h>
#include <stdio.h>
#include <string.h>
#include "m.h"
int main(int argc, char **argv)
{
	if (argc > 1 && strcmp(argv[1], "up") == 0) {
		fesetround(FE_UPWARD);
	}
	if (argc > 1 && strcmp(argv[1], "zero") == 0) {
		fesetround(FE_TOWARDZERO);
	}
	printf("%d\n", m_fp_check());
	return 0;
}
`
		require.NoError(t, os.WriteFile(filepath.Join(dir, "main.c"), []byte(main), 0o644))
		run := func(link string, arg string) string {
			t.Helper()
			args := []string{"-std=c99", "-O2", "-o", "fp", "main.c", "m.c", "-lm"}
			if link != "" {
				args = append(args, link)
			}
			require.NoError(t, cCommand(context.Background(), dir, nil, nil, "gcc", args...))
			var out bytes.Buffer
			require.NoError(t, cCommand(context.Background(), dir, nil, &out, "./fp", arg))
			return strings.TrimSpace(out.String())
		}
		require.Equal(t, "0", run("", ""), "float %v: a plain build", float)
		require.Equal(t, "4", run("", "up"), "float %v: rounding upward", float)
		require.Equal(t, "4", run("", "zero"), "float %v: rounding toward zero", float)
		require.Equal(t, "1", run("-ffast-math", ""), "float %v: linked with crtfastmath.o (FTZ and DAZ)", float)
		if !float {
			err := cCommand(context.Background(), dir, nil, nil, "gcc", "-std=c99", "-mfpmath=387", "-fsyntax-only", "m.c")
			require.ErrorContains(t, err, "FLT_EVAL_METHOD 0 or 1")
			require.NoError(t, cCommand(context.Background(), dir, nil, nil, "gcc", "-std=c99", "-mfpmath=387", "-DM_ALLOW_INEXACT_FP", "-fsyntax-only", "m.c"))
		}
	}
}
