package source

import (
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
)

// TestXGBoostCompiles: every imported fixture either compiles into a
// program that scores each fixture row bit for bit as the interpreter does,
// or is refused by the compiler with an error that names the version 2
// construct it lacks (what format 2 support in compile/ has not reached yet).
func TestXGBoostCompiles(t *testing.T) {
	for _, dir := range xgbFixtures(t) {
		t.Run(filepath.Base(dir), func(t *testing.T) {
			r, err := Load(filepath.Join(dir, "model.json"), "", Options{Missing: readMeta(t, dir).Missing})
			require.NoError(t, err)
			f := r.Forest
			p, _, err := compile.Compile(f, compile.Options{})
			if err != nil {
				require.True(t, strings.Contains(err.Error(), "not supported by the compiler yet") &&
					strings.Contains(err.Error(), "hint:"), "unclear refusal: %v", err)
				return
			}
			x := loadFixture(t, dir, f)
			k := f.NumOutputs()
			want, got := make([]float64, k), make([]float64, k)
			for i := 0; i < x.rows.Len(); i++ {
				f.Predict(x.rows.Row(i), want)
				compile.Eval(p, x.rows.Row(i), got)
				for j := range want {
					require.Equal(t, math.Float64bits(want[j]), math.Float64bits(got[j]), "row %d output %d", i, j)
				}
			}
		})
	}
}
