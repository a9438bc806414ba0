package verify

import (
	"context"
	"errors"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// TestFloatCalls: on a Cortex-M0, double C calls libgcc to compare and to
// add (__aeabi_dcmple or another comparison, __aeabi_dadd), and float C
// the float ones, in the function that scores; a model with a logistic
// also calls exp. The check that a layout walks its trees without
// floating point reads this map.
func TestFloatCalls(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join(goldenCases, "trained-wine", "model.json"))
	require.NoError(t, err)
	for _, float := range []bool{false, true} {
		p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(float))
		require.NoError(t, err)
		for _, layout := range []string{"nested", "table"} {
			calls, err := FloatCalls(context.Background(), p, ctarget.Options{Name: "wine", Layout: layout, Float: float})
			if errors.Is(err, ErrNoARM) {
				testenv.Need(t, err)
			}
			require.NoError(t, err)
			t.Logf("float %v %s: %v", float, layout, calls)
			var all []string
			for _, c := range calls {
				all = append(all, c...)
			}
			add, cmp := "__aeabi_dadd", "__aeabi_dcmp"
			if float {
				add, cmp = "__aeabi_fadd", "__aeabi_fcmp"
			}
			require.Contains(t, all, add, "float %v %s", float, layout)
			found := false
			for _, c := range all {
				found = found || len(c) > len(cmp) && c[:len(cmp)] == cmp
			}
			require.True(t, found, "float %v %s: no %s* call in %v", float, layout, cmp, calls)
		}
	}
}
