package verify

import (
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/internal/randmodel"
	"github.com/sawmill-dev/sawmill/internal/testenv"
)

// blockPartRows is the rows of TestCBlockParts: more than a block of the
// most rows (BlockMaxRows) and a part block of every size up to 70.
const blockPartRows = 300

// deepTrees draws forests of trees up to 24 deep (chains of up to 40
// splits), deeper than blockCheckDepth, so that the early stop is walked.
var deepTrees = randmodel.GenOptions{MaxTrees: 6, MaxFeatures: 6, MaxDepth: 24, MaxChain: 40, MaxNodes: 300, V1Only: true}

// TestCBlockParts builds the block layout for random forests of deep
// trees, in double and float, and scores their rows (the generator's: NaN,
// ±inf, values equal to and next to thresholds) with NAME_predict_batch
// over the first n rows for n from 1 to blockPartRows and from an offset
// of 5, so that every part block from 1 to 70 rows and whole blocks after
// it are walked; each output must be NAME_predict's bytes, and in double
// the interpreter's. Seeds 1 to 8 give keys of both kinds: values (float)
// and ranks (seeds 5 and 6). Cost: 8 forests, 11 builds with gcc -O2,
// about 10 s.
func TestCBlockParts(t *testing.T) {
	testenv.Need(t, cTools(false))
	built, ranks := 0, 0
	for seed := uint64(1); seed <= 8; seed++ {
		f := randmodel.RandomForest(seed, deepTrees)
		rows := randmodel.RandomRows(seed, f, blockPartRows)
		for _, float := range []bool{false, true} {
			p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(float))
			require.NoError(t, err)
			if float && ctarget.FitsFloat(p) != nil {
				continue
			}
			o := ctarget.Options{Layout: ctarget.Block, Float: float, Name: "deep"}
			if l, _, err := ctarget.Resolve(p, o); err != nil || l != ctarget.Block {
				continue
			}
			if !float {
				built++
			}
			t.Run(fmt.Sprintf("seed%d/float=%v", seed, float), func(t *testing.T) {
				got, rank := runBlockParts(t, p, o, rows.Values)
				if rank {
					ranks++
				}
				if float {
					return
				}
				out := make([]float64, p.NumOutputs)
				for r := 0; r < len(got)/p.NumOutputs; r++ {
					compile.Eval(p, rows.Row(r), out)
					for j, v := range out {
						if e := ctarget.ErrorBound(p, false); e == 0 {
							require.Equal(t, math.Float64bits(v), math.Float64bits(got[r*p.NumOutputs+j]), "row %d output %d: %v, C %v", r, j, v, got[r*p.NumOutputs+j])
						}
					}
				}
			})
		}
	}
	require.Equal(t, 8, built, "seeds 1 to 8: want 8 forests the block layout writes")
	require.GreaterOrEqual(t, ranks, 2, "forests with rank keys")
}

// runBlockParts emits p, builds a driver (gcc -O2 and flags) that checks
// NAME_predict_batch on every prefix of the rows (and from row 5) against
// NAME_predict, and returns NAME_predict's outputs as doubles and whether
// the keys are ranks.
func runBlockParts(t *testing.T, p *compile.Program, o ctarget.Options, values []float64, flags ...string) ([]float64, bool) {
	dir := t.TempDir()
	files, err := ctarget.Emit(p, o)
	require.NoError(t, err)
	rank := false
	for _, f := range files {
		rank = rank || strings.Contains(string(f.Data), "deep_bk_rank(")
		require.NoError(t, os.WriteFile(filepath.Join(dir, f.Name), f.Data, 0o644))
	}
	require.NoError(t, os.WriteFile(filepath.Join(dir, "driver.c"), []byte(blockPartsDriver(o.Float, values)), 0o644))
	args := append([]string{"-std=c99", "-O2", "-Wall", "-Werror"}, flags...)
	build := exec.CommandContext(context.Background(), "gcc", append(args, "-o", "run", "driver.c", "deep.c", "-lm")...)
	build.Dir = dir
	b, err := build.CombinedOutput()
	require.NoError(t, err, "%s", b)
	run := exec.Command(filepath.Join(dir, "run"))
	b, err = run.CombinedOutput()
	require.NoError(t, err, "%s", b)
	var got []float64
	for _, s := range strings.Fields(string(b)) {
		u, err := strconv.ParseUint(s, 16, 64)
		require.NoError(t, err, s)
		got = append(got, math.Float64frombits(u))
	}
	require.Len(t, got, len(values)/len(p.Features)*p.NumOutputs)
	return got, rank
}

// blockPartsDriver is the C driver of runBlockParts: the rows as bit
// patterns, NAME_predict row by row, then NAME_predict_batch over every
// prefix and from row 5, each compared byte for byte; it prints
// NAME_predict's outputs as the hex bits of doubles.
func blockPartsDriver(float bool, values []float64) string {
	ft, ut, bits := "double", "uint64_t", func(v float64) string { return fmt.Sprintf("0x%016xu", math.Float64bits(v)) }
	if float {
		ft, ut, bits = "float", "uint32_t", func(v float64) string { return fmt.Sprintf("0x%08xu", math.Float32bits(float32(v))) }
	}
	var cells []string
	for _, v := range values {
		cells = append(cells, bits(v))
	}
	return `#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include "deep.h"

#define N (sizeof bits / sizeof bits[0] / DEEP_NUM_FEATURES)
#define W (N * DEEP_NUM_OUTPUTS)
static const ` + ut + ` bits[] = {` + strings.Join(cells, ", ") + `};
static ` + ft + ` x[sizeof bits / sizeof bits[0]], want[W], got[W];

int main(void)
{
	size_t n, r;
	memcpy(x, bits, sizeof x);
	for (r = 0; r < N; r++) {
		deep_predict(x + r * DEEP_NUM_FEATURES, want + r * DEEP_NUM_OUTPUTS);
	}
	for (n = 1; n <= N; n++) {
		memset(got, 0xff, sizeof got);
		deep_predict_batch(x, n, got);
		if (memcmp(got, want, n * DEEP_NUM_OUTPUTS * sizeof got[0]) != 0) {
			fprintf(stderr, "the first %lu rows: deep_predict_batch differs from deep_predict\n", (unsigned long)n);
			return 3;
		}
		if (n + 5 <= N) {
			deep_predict_batch(x + 5 * DEEP_NUM_FEATURES, n, got);
			if (memcmp(got, want + 5 * DEEP_NUM_OUTPUTS, n * DEEP_NUM_OUTPUTS * sizeof got[0]) != 0) {
				fprintf(stderr, "%lu rows from row 5: deep_predict_batch differs from deep_predict\n", (unsigned long)n);
				return 3;
			}
		}
	}
	for (r = 0; r < W; r++) {
		double d = (double)want[r];
		uint64_t u;
		memcpy(&u, &d, sizeof u);
		printf("%016llx\n", (unsigned long long)u);
	}
	return 0;
}
`
}
