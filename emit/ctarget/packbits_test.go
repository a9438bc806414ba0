package ctarget

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/require"
)

// Fields put at random widths from 1 to 64 bits read back whole (those
// past 32 bits in two reads, as NAME_cut_at does), across word edges.
func TestBitStreamRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	type field struct {
		v          uint64
		pos, width int
	}
	var fs []field
	b := &bitStream{}
	for range 2000 {
		w := 1 + rng.IntN(64)
		v := rng.Uint64() & (1<<w - 1)
		if w == 64 {
			v = rng.Uint64()
		}
		fs = append(fs, field{v, b.n, w})
		b.put(v, w)
	}
	require.Len(t, b.padded(), len(b.words)+1, "a spare word")
	for i, f := range fs {
		got := uint64(b.get(f.pos, min(f.width, 32)))
		if f.width > 32 {
			got |= uint64(b.get(f.pos+32, f.width-32)) << 32
		}
		require.Equal(t, f.v, got, "field %d: %d bits at %d", i, f.width, f.pos)
	}
}

// The count tiers put the rows of small counts first and cost no more
// than one width for all; a wrong tier would misread a count.
func TestChoosePackedCounts(t *testing.T) {
	rows := [][]uint32{{3000, 1}, {1, 2}, {200, 55}, {0, 7}, {4095, 0}}
	pc, order := choosePackedCounts(rows)
	require.Equal(t, 12, pc.w2)
	require.Less(t, pc.w1, pc.w2)
	require.Equal(t, 3, pc.w1, "2*2*3 + 3*2*12 bits, the fewest")
	require.Equal(t, 2, pc.k1, "two rows fit 3 bits")
	require.Equal(t, []int{1, 3, 2, 0, 4}, order)
	sorted := make([][]uint32, len(rows))
	for i, o := range order {
		sorted[i] = rows[o]
	}
	s := pc.stream(sorted)
	require.LessOrEqual(t, pc.bytes(5, 2), packedBytes(10, 12))
	for r, c := range sorted {
		w, pos := pc.w2, pc.k1*2*pc.w1+(r-pc.k1)*2*pc.w2
		if r < pc.k1 {
			w, pos = pc.w1, r*2*pc.w1
		}
		for j := range c {
			require.Equal(t, c[j], s.get(pos+j*w, w), "row %d class %d", r, j)
		}
	}
}
