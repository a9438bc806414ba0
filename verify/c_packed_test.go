package verify

import (
	"bytes"
	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync/atomic"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
	"github.com/sawmill-dev/sawmill/internal/goldencase"
)

// Packed bits (ctarget.Options.Pack) change where the table and binned
// layouts keep their split words, leaf rows and class counts, never an
// output bit: every golden case, the binned neighbour forests and the
// count forests score as the interpreter does, double and float; and a
// reader planted wrong is caught.

// packRunner is the host C runner with packed bits.
func packRunner() cRunner {
	r := testCRunner()
	r.Pack = true
	return r
}

// checkPacked scores p packed in layout for variant and compares with the
// interpreter's want and wantCls; it returns whether the C used packed
// arrays (it calls the reader).
func checkPacked(t *testing.T, p *compile.Program, layout, variant string, rows *forest.Rows, want []float64, wantCls []int) bool {
	r := packRunner()
	res, err := r.Score(context.Background(), p, layout, variant, rows, t.TempDir())
	if errors.Is(err, ErrDeclined) {
		return false
	}
	require.NoError(t, err, "%s %s", layout, variant)
	exact, bound := r.Tolerance(variant, p)
	m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound)
	require.True(t, m.OK(), "%s %s: %s", layout, variant, m)
	return strings.Contains(cSource(t, p, r.options(layout, variant)), cName+"_field(")
}

// TestCPackedGolden scores every golden case whose table or binned C packs
// something (about a quarter of the builds; the others are the ordinary
// golden run's C): about 30 seconds.
func TestCPackedGolden(t *testing.T) {
	requireC(t)
	cases, err := goldencase.Cases(goldenCases)
	require.NoError(t, err)
	r := packRunner()
	var ran int
	var packed atomic.Int32
	t.Run("cases", func(t *testing.T) {
		for _, c := range cases {
			if c.WantErr != "" || len(c.Flags.Runners) > 0 && !slices.Contains(c.Flags.Runners, r.Name()) || c.Flags.Slow {
				continue
			}
			for _, variant := range r.Variants() {
				p, _, err := compile.Compile(c.Model, r.CompileOptions(variant))
				require.NoError(t, err)
				for _, layout := range []string{emit.Table, emit.Binned} {
					if layout == emit.Binned && hasSetSplit(p) {
						continue
					}
					ran++
					if !readsPacked(p, r.options(layout, variant)) {
						continue // nothing packed (or declined): the C of the ordinary golden run
					}
					t.Run(c.Name+"/"+layout+"/"+variant, func(t *testing.T) {
						t.Parallel()
						want, wantCls := c.ReferenceFor(r, variant)
						require.True(t, checkPacked(t, p, layout, variant, c.Rows, want, wantCls))
						packed.Add(1)
					})
				}
			}
		}
	})
	require.Greater(t, ran, 80, "golden builds")
	require.Greater(t, packed.Load(), int32(20), "golden builds that read packed arrays")
	t.Logf("%d builds, %d of them read packed arrays", ran, packed.Load())
}

// readsPacked reports whether the C o writes for p reads a packed array;
// false where the target declines p.
func readsPacked(p *compile.Program, o ctarget.Options) bool {
	files, err := ctarget.Emit(p, o)
	if err != nil {
		return false
	}
	for _, f := range files {
		if f.Name == o.Name+".c" {
			return bytes.Contains(f.Data, []byte(o.Name+"_field("))
		}
	}
	return false
}

// hasSetSplit reports whether p has a set split (the binned layout refuses them).
func hasSetSplit(p *compile.Program) bool {
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			if p.Trees[ti].Nodes[i].IsSetSplit() {
				return true
			}
		}
	}
	return false
}

func TestCPackedNeighbours(t *testing.T) {
	requireC(t)
	for _, c := range neighbourForests(t, 3) {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			for _, variant := range packRunner().Variants() {
				p, _, err := compile.Compile(c.f, packRunner().CompileOptions(variant))
				require.NoError(t, err)
				want, wantCls := cReference(c.f, c.rows, variant == "float")
				for _, layout := range []string{emit.Table, emit.Binned} {
					require.True(t, checkPacked(t, p, layout, variant, c.rows, want, wantCls), "%s %s: no packed array", layout, variant)
				}
			}
		})
	}
}

// Class counts packed in two tiers give the bits of the leaf values
// stored whole, in double and float builds of the count forests.
func TestCPackedCounts(t *testing.T) {
	requireC(t)
	r := packRunner()
	for name, f := range countForests(t) {
		rows := leafCountRows(t, f)
		for _, variant := range r.Variants() {
			p, _, err := compile.Compile(f, r.CompileOptions(variant))
			require.NoError(t, err)
			for _, layout := range []string{emit.Table, emit.Binned} {
				t.Run(name+"/"+layout+"/"+variant, func(t *testing.T) {
					o := r.options(layout, variant)
					packed, err := r.score(context.Background(), p, o, rows, t.TempDir(), cBuilds(cQuickMatrix), false)
					require.NoError(t, err)
					o.Pack, o.LeafValues = false, true
					stored, err := r.score(context.Background(), p, o, rows, t.TempDir(), cBuilds(cQuickMatrix), false)
					require.NoError(t, err)
					requireSameBits(t, f, "packed", packed, stored)
				})
			}
		}
	}
}

// A packed field read wrong is caught: NAME_field planted to drop the bits
// a field takes from the next word (or to read one bit to the left) gives
// outputs the comparison with the interpreter rejects.
func TestCPackedPlanted(t *testing.T) {
	requireC(t)
	f := packedForest(t)
	rows := leafCountRows(t, f)
	r := packRunner()
	p, _, err := compile.Compile(f, r.CompileOptions("double"))
	require.NoError(t, err)
	want, wantCls := cReference(f, rows, false)
	for _, plant := range []struct{ old, new string }{
		{"const uint32_t hi = (a[q + 1u] << 1) << (31u - s);", "const uint32_t hi = 0u;"},
		{"const uint32_t q = pos >> 5, s = pos & 31u;", "const uint32_t q = (pos + 1u) >> 5, s = (pos + 1u) & 31u;"},
	} {
		for _, layout := range []string{emit.Table, emit.Binned} {
			t.Cleanup(func() { cEdit = nil })
			cEdit = func(file string, data []byte) []byte {
				if file != cName+".c" {
					return data
				}
				require.True(t, bytes.Contains(data, []byte(plant.old)), "%s: no %q (not packed?)", layout, plant.old)
				return bytes.Replace(data, []byte(plant.old), []byte(plant.new), 1)
			}
			res, err := r.Score(context.Background(), p, layout, "double", rows, t.TempDir())
			cEdit = nil
			// a build that stops (a sanitizer's out-of-bounds read) is caught too
			caught := err != nil || !Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, true, 0).OK()
			require.True(t, caught, "%s: planted %q not caught", layout, plant.new)
		}
	}
}

// packedForest is a forest whose table and binned layouts both pack their
// split words: sawmill train's, fully grown, 40 trees on the Breast Cancer
// Wisconsin (Diagnostic) data (the golden fixture), so left subtrees need
// more bits than 16-bit words leave.
func packedForest(t *testing.T) *forest.Forest {
	d, err := train.ReadCSVFile(filepath.Join(goldenCases, "sklearn-breast-cancer", "data.csv"), train.ReadOptions{Label: "label", Task: forest.Classification})
	require.NoError(t, err)
	res, err := train.Train(d, train.Settings{Trees: 40, Seed: 7, SkipImportance: true})
	require.NoError(t, err)
	return res.Forest
}

// The packed forest reads packed arrays in both layouts, double and float.
func TestCPackedForestPacks(t *testing.T) {
	f := packedForest(t)
	r := packRunner()
	for _, variant := range r.Variants() {
		p, _, err := compile.Compile(f, r.CompileOptions(variant))
		require.NoError(t, err)
		for _, layout := range []string{emit.Table, emit.Binned} {
			src := cSource(t, p, r.options(layout, variant))
			require.True(t, strings.Contains(src, cName+"_field("+cName+"_node, "), "%s %s: split words not packed", layout, variant)
		}
	}
}

// TestBoardPacked runs the packed table and binned layouts of the packed
// forest on the bare-metal boards (Cortex-M4 double and float, and the
// Cortex-M0, which faults on an unaligned load) and compares every row with
// the interpreter (bit for bit; the float build within its bound) and bit for
// bit with the unpacked build. About half a minute.
func TestBoardPacked(t *testing.T) {
	if testing.Short() {
		t.Skip("board runs: without -short")
	}
	f := packedForest(t)
	rows := leafCountRows(t, f)
	r := boardRunner{Werror: true, cEmit: cEmit{Pack: true}}
	for _, board := range []string{"m4", "m4-float", "m0"} {
		for _, layout := range []string{emit.Table, emit.Binned} {
			t.Run(board+"/"+layout, func(t *testing.T) {
				if err := boardTools(findBoard(board)); err != nil {
					if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
						t.Fatalf("%v, and SAWMILL_REQUIRE_ENGINES is set", err)
					}
					t.Skipf("skipped: %v", err)
				}
				p, _, err := compile.Compile(f, r.CompileOptions(board))
				require.NoError(t, err)
				require.True(t, strings.Contains(cSource(t, p, r.options(layout, board)), cName+"_field("+cName+"_node, "), "not packed")
				res, err := r.Score(context.Background(), p, layout, board, rows, t.TempDir())
				require.NoError(t, err)
				want, wantCls := cReference(f, rows, findBoard(board).float)
				exact, bound := r.Tolerance(board, p)
				m := Compare(want, res.Outputs, wantCls, res.Classes, p.NumOutputs, exact, bound)
				require.True(t, m.OK(), "%s", m)
				plain, err := boardRunner{Werror: true}.Score(context.Background(), p, layout, board, rows, t.TempDir())
				require.NoError(t, err)
				for i := range plain.Outputs {
					require.Equal(t, math.Float64bits(plain.Outputs[i]), math.Float64bits(res.Outputs[i]), "output %d: packed and unpacked differ", i)
				}
			})
		}
	}
}
