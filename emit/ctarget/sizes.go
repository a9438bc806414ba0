package ctarget

import (
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
func Layouts() []string { return []string{emit.Nested, emit.Table} }

// Sizes reports the static tables of every layout of p (o.Layout is
// ignored). It emits each layout, so it costs what Emit costs.
func Sizes(p *compile.Program, o Options) ([]Size, error) {
	var out []Size
	for _, l := range Layouts() {
		o.Layout = l
		g, err := newGen(p, o)
		if err != nil {
			return nil, err
		}
		var body printer
		switch l {
		case emit.Nested:
			g.nested(&body)
		case emit.Table:
			if err := g.table(&body); err != nil {
				return nil, err
			}
		}
		s := Size{Layout: l, Nodes: p.NumNodes(), Tables: g.tables, WorstSplits: WorstSplits(p)}
		for _, t := range g.tables {
			s.TableBytes += t.Bytes()
		}
		out = append(out, s)
	}
	return out, nil
}
