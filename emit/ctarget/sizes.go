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
}

// BytesPerNode is TableBytes over the number of nodes, leaves included.
func (s Size) BytesPerNode() float64 { return float64(s.TableBytes) / float64(s.Nodes) }

// Layouts are the layouts Emit writes besides emit.Auto.
func Layouts() []string { return []string{emit.Nested, emit.Table, Bitvector} }

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
		switch g.layout { // bitvector falls back to table where it cannot be written
		case emit.Nested:
			g.nested(&body)
		case emit.Table:
			if err := g.table(&body); err != nil {
				return nil, err
			}
		case Bitvector:
			g.bitvector(&body)
		}
		s := Size{Layout: l, Nodes: p.NumNodes(), Tables: g.tables}
		for _, t := range g.tables {
			s.TableBytes += t.Bytes()
		}
		out = append(out, s)
	}
	return out, nil
}
