package main

import (
	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
)

// cTarget emits NAME.h and NAME.c through emit/ctarget. --float compiles the
// comparisons for float inputs (exact for every float input).
func cTarget() target {
	return target{
		name: "c",
		options: func(fl *compileFlags) compile.Options {
			return compile.Options{SingleInputs: fl.float}
		},
		emit: func(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
			name := fl.name
			if name == "" {
				name = "model"
			}
			return ctarget.Emit(p, ctarget.Options{Name: name, Layout: fl.layout, Float: fl.float})
		},
	}
}
