package main

import (
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/verify"
)

// emitC emits NAME.h and NAME.c through emit/ctarget, with --threads
// NAME_threads.h and NAME_threads.c, and with --selftest NAME_selftest.c
// beside them.
func emitC(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
	o := ctarget.Options{Name: fl.name, Layout: fl.layout, Float: fl.float, Threads: fl.threads, IntLeaves: fl.intLeaves, LeafValues: fl.leafVals}
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

// printIntLeafBounds says, for --int-leaves, how far each output of the
// lossy build may be from the exact model's.
func printIntLeafBounds(w io.Writer, p *compile.Program, fl *compileFlags) error {
	if fl.intLeaves == 0 {
		return nil
	}
	o := ctarget.Options{Name: fl.name, Layout: fl.layout, Float: fl.float, IntLeaves: fl.intLeaves}
	bounds, scale, err := ctarget.IntLeafBounds(p, o)
	if err != nil {
		return err
	}
	var bs []string
	for _, b := range bounds {
		bs = append(bs, strconv.FormatFloat(b, 'g', 3, 64))
	}
	fmt.Fprintf(w, "int leaves (lossy): int%d, scale %s; every output within [%s] of the exact model's\n",
		o.IntLeaves, strconv.FormatFloat(scale, 'g', -1, 64), strings.Join(bs, ", "))
	return nil
}
