package ctarget

import (
	"fmt"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
)

// Size is what one layout of a program costs.
type Size struct {
	Layout string
	Nodes  int
	Tables []Table // the static model tables of NAME.c
	// TableBytes is the sum of Tables (name strings and code not counted).
	TableBytes int
	// WorstSplits is the most splits one prediction tests (WorstSplits).
	WorstSplits int
}

// WorstSplits is the most splits one prediction tests, exactly: the sum of
// the trees' depths, each tree walked once from its root to a leaf, one
// test a split (a missing-value test and the comparison count as one, as
// does a set split's lookup). Every layout walks the same splits.
func WorstSplits(p *compile.Program) int {
	n := 0
	for i := range p.Trees {
		n += p.Trees[i].Depth()
	}
	return n
}

// BytesPerNode is TableBytes over the number of nodes, leaves included.
func (s Size) BytesPerNode() float64 { return float64(s.TableBytes) / float64(s.Nodes) }

// Layouts are the layouts Emit writes besides emit.Auto.
func Layouts() []string {
	return []string{emit.Nested, emit.Table, emit.Binned, Bitvector, Block, Perfect}
}

// Sizes reports the static tables of every layout of p (o.Layout is
// ignored); a model the binned layout refuses (set splits, too many cuts)
// has no binned row, and one the bitvector layout cannot write (see
// bitvectorFits) no bitvector row, and likewise block and perfect. With
// o.ConstantTime it reports the one layout constant time writes, and with
// o.Pack the two layouts packing changes (table and binned). It emits each
// layout, so it costs what Emit costs.
func Sizes(p *compile.Program, o Options) ([]Size, error) {
	if o.ConstantTime {
		return constantTimeSizes(p, o)
	}
	var out []Size
	layouts := Layouts()
	if o.Pack {
		layouts = []string{emit.Table, emit.Binned}
	}
	for _, l := range layouts {
		s, err := sizeOf(p, o, l)
		if err != nil && (l == emit.Binned || l == Bitvector || l == Block || l == Perfect || o.IntLeaves != 0 && l == emit.Nested) {
			continue
		}
		if err != nil {
			return nil, err
		}
		out = append(out, s)
	}
	return out, nil
}

// LayoutSize is Sizes for the one layout o asks for (o.Layout resolved,
// not auto; with o.ConstantTime, binned).
func LayoutSize(p *compile.Program, o Options) (Size, error) {
	if o.ConstantTime {
		s, err := constantTimeSizes(p, o)
		if err != nil {
			return Size{}, err
		}
		return s[0], nil
	}
	return sizeOf(p, o, o.Layout)
}

// sizeOf emits p in layout l and sums its tables.
func sizeOf(p *compile.Program, o Options, l string) (Size, error) {
	o.Layout = l
	g, err := newGen(p, o)
	if err != nil {
		return Size{}, err
	}
	if g.layout != l {
		return Size{}, fmt.Errorf("%s: %s", l, g.why) // bitvector written as table
	}
	var body printer
	switch l {
	case emit.Nested:
		g.nested(&body)
	case emit.Table:
		err = g.table(&body)
	case emit.Binned:
		err = g.binned(&body)
	case Bitvector:
		g.bitvector(&body)
	case Block:
		if err = g.block(&body); err == nil {
			g.batch(&body) // the block walk's own tables
		}
	case Perfect:
		if err = g.perfect(&body); err == nil {
			g.batch(&body) // the perfect walk's own tables
		}
	}
	if err != nil {
		return Size{}, err
	}
	s := Size{Layout: l, Nodes: p.NumNodes(), Tables: g.tables, WorstSplits: WorstSplits(p)}
	for _, t := range g.tables {
		s.TableBytes += t.Bytes()
	}
	return s, nil
}

// tableOrBinned is auto's choice where nested code is too big to build:
// binned when the model can be binned and its tables are smaller than the
// table layout's, else table. Binned tables are smaller when thresholds
// repeat: a 100-tree depth-8 forest trained with --max-bins 255 takes
// 149,092 bytes binned against 170,894 as a table (double C, leaves as
// class counts; the split words shrink from 4 bytes to 3, the edges are
// floats so the cuts take 4); trained without bins, the table layout's
// one threshold per split and 2-byte words take 274,802 bytes against
// binned's 313,020, so table stays (the figures of bench/c/m4.sh, with
// MAX_BINS=255 for the first). The price
// is speed on a desktop core: its one-lane walk took 1.72 times the table
// layout's time on the first forest (x86-64, gcc -O2, bench/c/binned.sh).
func tableOrBinned(p *compile.Program, o Options, why string) (string, string, error) {
	t, err := sizeOf(p, o, emit.Table)
	if err != nil {
		return emit.Table, why, nil // Emit reports it
	}
	b, err := sizeOf(p, o, emit.Binned)
	if err != nil || b.TableBytes >= t.TableBytes {
		return emit.Table, why, nil
	}
	return emit.Binned, fmt.Sprintf("%s; binned tables take %d bytes, the table layout's %d", why, b.TableBytes, t.TableBytes), nil
}
