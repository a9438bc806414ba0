package main

import (
	"fmt"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/verify"
)

// emitC emits NAME.h and NAME.c through emit/ctarget, with --threads
// NAME_threads.h and NAME_threads.c, and with --selftest NAME_selftest.c
// beside them.
func emitC(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
	o := ctarget.Options{Name: fl.name, Layout: fl.layout, Float: fl.float, Threads: fl.threads, LeafValues: fl.leafVals}
	files, err := ctarget.Emit(p, o)
	if err != nil || !fl.selftest {
		return files, err
	}
	st, err := ctarget.Selftest(p, o, verify.CSelftestProbes(fl.model, fl.float))
	if err != nil {
		return nil, fmt.Errorf("selftest: %v", err)
	}
	return append(files, st), nil
}
