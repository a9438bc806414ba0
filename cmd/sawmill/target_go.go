package main

import (
	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/gotarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// emitGo emits a Go package through emit/gotarget with --package, --layout,
// --tables and the --sample rows.
func emitGo(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
	o := gotarget.Options{Package: fl.pkg, Layout: fl.layout, Tables: fl.tables}
	if fl.sample != "" {
		names := make([]string, len(p.Features))
		for i, f := range p.Features {
			names[i] = f.Name
		}
		rows, err := forest.ReadRowsFile(fl.sample, names, forest.RowOptions{})
		if err != nil {
			return nil, err
		}
		for i := 0; i < rows.Len(); i++ {
			o.Sample = append(o.Sample, rows.Row(i))
		}
	}
	return gotarget.Emit(p, o)
}
