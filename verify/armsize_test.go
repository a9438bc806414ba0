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

func TestMeasureARM(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join(goldenCases, "trained-wine", "model.json"))
	require.NoError(t, err)
	p, _, err := compile.Compile(f, compile.Options{SingleInputs: true})
	require.NoError(t, err)
	sizes, err := MeasureARM(context.Background(), p, ctarget.Options{Float: true})
	if errors.Is(err, ErrNoARM) {
		testenv.Need(t, err)
	}
	require.NoError(t, err)
	require.Len(t, sizes, len(ctarget.Layouts()))
	for _, s := range sizes {
		require.NotNil(t, s.ARM, s.Layout)
		t.Logf("%s: tables %d bytes; Cortex-M4 -Os object: .text %d, .rodata %d, .data+.bss %d, stack %d; at most %d splits", s.Layout, s.TableBytes, s.ARM.Text, s.ARM.Rodata, s.ARM.Data, s.ARM.Stack, s.WorstSplits)
		require.Greater(t, s.ARM.Text, 0)
		require.GreaterOrEqual(t, s.ARM.Rodata, s.TableBytes, "the tables are in .rodata")
		require.Zero(t, s.ARM.Data, "generated code has no writable data")
		require.Greater(t, s.ARM.Stack, 0, "gcc -fstack-usage gives predict's frame")
		require.Greater(t, s.WorstSplits, 0)
	}
}
