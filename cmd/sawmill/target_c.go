package main

import (
	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
)

// emitC emits C through emit/ctarget with --name, --layout, --float and
// --threads (NAME_threads.h and NAME_threads.c besides NAME.h and NAME.c).
func emitC(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
	return ctarget.Emit(p, ctarget.Options{Name: fl.name, Layout: fl.layout, Float: fl.float, Threads: fl.threads})
}
