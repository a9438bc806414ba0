package main

import (
	"path/filepath"
	"strconv"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

// predict --raw prints the joined scores before transform_scale and the
// transform, one column per output, exactly forest.PredictRaw's; without
// --raw the outputs, one column per output of a multi-output regressor.
func TestPredictRawV2(t *testing.T) {
	rows := filepath.Join(t.TempDir(), "rows.csv")
	require.NoError(t, forest.WriteFileAtomic(rows, []byte("x,a,b\n-1,0,5\n1,2,0\n,,\n"), 0o644))
	cases := []struct {
		model     string
		rawHeader []string
		header    []string
	}{
		{"v2-multi-output-exp.json", []string{"raw_0", "raw_1"}, []string{"prediction_0", "prediction_1"}},
		{"v2-softmax-output-trees.json", []string{"raw_p", "raw_q", "raw_r"}, []string{"p", "q", "r", "class"}},
		{"v2-float32-logistic.json", []string{"raw"}, []string{"healthy", "failing", "class"}},
	}
	for _, c := range cases {
		path := "../../forest/testdata/" + c.model
		f, err := forest.ReadFile(path)
		require.NoError(t, err)
		x, err := forest.ReadRowsFile(rows, f.Features, forest.RowOptions{})
		require.NoError(t, err)
		for _, raw := range []bool{true, false} {
			args := []string{"predict", path, rows}
			if raw {
				args = append(args, "--raw")
			}
			code, out, errs := sawmill(t, args...)
			require.Equal(t, 0, code, errs)
			recs := readCSV(t, out)
			require.Len(t, recs, 4)
			if !raw {
				assert.Equal(t, c.header, recs[0], c.model)
				continue
			}
			assert.Equal(t, c.rawHeader, recs[0], c.model)
			want := make([]float64, f.NumOutputs())
			for i, rec := range recs[1:] {
				f.PredictRaw(x.Row(i), want)
				require.Len(t, rec, len(want))
				for j, s := range rec {
					got, err := strconv.ParseFloat(s, 64)
					require.NoError(t, err)
					assert.Equal(t, want[j], got, "%s row %d output %d", c.model, i, j)
				}
			}
		}
	}
}

// inspect names the version 2 keys a model uses; compile writes it for the
// Go target, and a target that cannot write a construct yet refuses it,
// naming the file, tree and node.
func TestInspectAndCompileV2(t *testing.T) {
	code, out, errs := sawmill(t, "inspect", "../../forest/testdata/v2-set-split.json")
	require.Equal(t, 0, code, errs)
	for _, want := range []string{
		"format         version 2: category_match, missing_value, trees[].categories, trees[].zero_missing\n",
		"set splits     1, category_match truncate\n",
		"zero missing   1 split where |x| <= 1.0000000180025095e-35 counts as missing\n",
		"missing value  -999 counts as missing in every input\n",
	} {
		assert.Contains(t, out, want)
	}
	code, out, errs = sawmill(t, "inspect", "../../forest/testdata/v2-set-split.json", "--json")
	require.Equal(t, 0, code, errs)
	assert.Contains(t, out, `"format_version": 2`)
	assert.Contains(t, out, `"set_splits": 1`)
	code, out, _ = sawmill(t, "inspect", "../../forest/testdata/pump.json", "--json")
	require.Equal(t, 0, code)
	assert.Contains(t, out, `"format_version": 1`)
	assert.NotContains(t, out, "v2_keys")

	code, _, errs = sawmill(t, "compile", "../../forest/testdata/v2-set-split.json", "--target", "go", "-o", t.TempDir())
	assert.Equal(t, 0, code, errs)
	code, _, errs = sawmill(t, "compile", "../../forest/testdata/v2-set-split.json", "--target", "c", "-o", t.TempDir())
	assert.Equal(t, 0, code, errs)
	code, _, errs = sawmill(t, "compile", "../../forest/testdata/v2-set-split.json", "--target", "sql", "--dialect", "sqlite", "-o", t.TempDir())
	assert.Equal(t, 0, code, errs)
}
