package main

import (
	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	cemit "github.com/sawmill-dev/sawmill/emit/c"
)

// cTarget emits NAME.h and NAME.c through emit/c. --float compiles the
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
			return cemit.Emit(p, cemit.Options{Name: name, Layout: fl.layout, Float: fl.float})
		},
	}
}
