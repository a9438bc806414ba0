package main

import (
	"context"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/spf13/pflag"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/verify"
)

// emitC emits NAME.h and NAME.c through emit/ctarget, with --threads
// NAME_threads.h and NAME_threads.c, and with --selftest NAME_selftest.c
// beside them.
func emitC(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
	o := cOptions(fl)
	if fl.boardFacts {
		facts, err := boardFacts(context.Background(), p, o, fl)
		if err != nil {
			return nil, err
		}
		o.Facts = facts
	}
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

// cOptions are the C target's options the compile flags ask for.
func cOptions(fl *compileFlags) ctarget.Options {
	return ctarget.Options{Name: fl.name, Layout: fl.layout, Float: fl.float, Threads: fl.threads,
		IntLeaves: fl.intLeaves, ConstantTime: fl.constTime, LeafValues: fl.leafVals, Pack: fl.pack}
}

// printIntLeafBounds says, for --int-leaves, how far each output of the
// lossy build may be from the exact model's.
func printIntLeafBounds(w io.Writer, p *compile.Program, fl *compileFlags) error {
	if fl.intLeaves == 0 {
		return nil
	}
	o := cOptions(fl)
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

// addConstantTimeFlag adds --constant-time and --board-facts.
func addConstantTimeFlag(f *pflag.FlagSet, fl *compileFlags) {
	f.BoolVar(&fl.boardFacts, "board-facts", false, "C: measure the layout written on a Cortex-M4 and M0 (flash, RAM, stack with arm-none-eabi-gcc; instructions per prediction under QEMU, as inspect --c-sizes) and write the figures into NAME.h; needs the tools .ci/setup installs")
	f.BoolVar(&fl.constTime, "constant-time", false, "C: every prediction executes the same instructions (the binned layout, each tree walked its depth, no branch on the input), for control loops that need fixed timing; the emitted code runs 1.3 to 3.4 times the binned layout's instructions (measured under QEMU)")
}

// constantTimeFlags refuses --constant-time with a layout other than
// binned or auto, and with a budget (which chooses among layouts).
func constantTimeFlags(fl *compileFlags) error {
	if !fl.constTime {
		return nil
	}
	if fl.layout != emit.Auto && fl.layout != emit.Binned {
		return usageError{fmt.Errorf("sawmill compile: --constant-time writes the binned layout, not --layout %s: the other layouts stop each walk at its leaf\nhint: leave out --layout, or give --layout binned", fl.layout)}
	}
	if fl.intLeaves != 0 {
		return usageError{fmt.Errorf("sawmill compile: --constant-time and --int-leaves together are not built yet\nhint: choose one")}
	}
	if fl.budget.set() {
		return usageError{fmt.Errorf("sawmill compile: --constant-time and a budget: the budget chooses among layouts, constant time has one (binned)\nhint: leave out the budget and check the size with 'sawmill inspect --c-sizes'")}
	}
	return nil
}
