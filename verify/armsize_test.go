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

// MeasureBoth compiles every layout for the Cortex-M0 as well. Its code is
// ARMv6-M Thumb, a subset of the M4's Thumb-2, so at least one layout's
// .text differs from the M4 object's.
func TestMeasureBoth(t *testing.T) {
	f, err := forest.ReadFile(filepath.Join(goldenCases, "trained-wine", "model.json"))
	require.NoError(t, err)
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	sizes, err := MeasureBoth(context.Background(), p, ctarget.Options{})
	if errors.Is(err, ErrNoARM) {
		testenv.Need(t, err)
	}
	require.NoError(t, err)
	differ := 0
	for _, s := range sizes {
		require.NotNil(t, s.M0, s.Layout)
		t.Logf("%s: Cortex-M0 .text %d .rodata %d; Cortex-M4 .text %d .rodata %d", s.Layout, s.M0.Text, s.M0.Rodata, s.ARM.Text, s.ARM.Rodata)
		require.Contains(t, s.M0.Flags, "-mcpu=cortex-m0")
		require.Greater(t, s.M0.Text, 0)
		require.GreaterOrEqual(t, s.M0.Rodata, s.TableBytes, "the tables are in .rodata")
		require.Zero(t, s.M0.Data, "generated code has no writable data")
		if s.M0.Text != s.ARM.Text {
			differ++
		}
	}
	require.Positive(t, differ, "every M0 object is the M4's size: were both built for the same core?")
}
