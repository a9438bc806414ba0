package main

import (
	"context"
	"fmt"
	"io"
	"strings"

	"github.com/spf13/pflag"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

// budgetFlags are compile's --flash-budget and --ram-budget (C only).
type budgetFlags struct {
	flash, ram int
}

// add registers the flags on f.
func (b *budgetFlags) add(f *pflag.FlagSet) {
	f.IntVar(&b.flash, "flash-budget", 0, "C: the flash the model may take, in bytes; compile picks the smallest exact layout that fits, or fails saying by how much each misses")
	f.IntVar(&b.ram, "ram-budget", 0, "C: the RAM a prediction may take (data, bss and stack, from arm-none-eabi-gcc -fstack-usage), in bytes")
}

// set reports whether a budget was given.
func (b *budgetFlags) set() bool { return b.flash > 0 || b.ram > 0 }

// batchBudget refuses a budget beside --layout batch, which asks for the
// walk of desktops and servers.
func batchBudget(fl *compileFlags) error {
	if fl.budget.set() && fl.layout == ctarget.Batch {
		return usageError{fmt.Errorf("sawmill compile: --layout batch is for desktops and servers, a flash or RAM budget for boards\nhint: leave out --layout batch or the budget")}
	}
	return nil
}

// fitBudget measures p's C layouts against the budget and sets fl.layout
// to the smallest that fits, printing the measurements to w.
func fitBudget(ctx context.Context, w io.Writer, p *compile.Program, fl *compileFlags) error {
	if fl.budget.flash < 0 || fl.budget.ram < 0 {
		return usageError{fmt.Errorf("sawmill compile: a budget is a number of bytes above 0")}
	}
	o := ctarget.Options{Name: fl.name, Layout: fl.layout, Float: fl.float, LeafValues: fl.leafVals, Pack: fl.pack}
	b := verify.Budget{Flash: fl.budget.flash, RAM: fl.budget.ram}
	chosen, rows, err := verify.FitBudget(ctx, p, o, b)
	if err != nil {
		return err
	}
	for _, r := range rows {
		fmt.Fprintf(w, "%s\n", budgetLine(r, r == chosen))
	}
	fl.layout, fl.pack = chosen.Layout, chosen.Pack
	return nil
}

// budgetLine is one layout's row of the report.
func budgetLine(r verify.BudgetRow, chosen bool) string {
	s := fmt.Sprintf("  %-14s flash %d bytes", r.Name(), r.Flash)
	if !r.Measured {
		s += " (tables alone: " + verify.ARMCompiler + " is not on PATH)"
	}
	if r.RAM >= 0 {
		s += fmt.Sprintf(", RAM %d bytes", r.RAM)
	}
	if chosen {
		s += "  <- chosen"
	}
	return s
}

// intFeatures floors the thresholds of the features named by
// --int-features (forest.WithIntegerFeatures) and says how many changed.
func intFeatures(w io.Writer, f *forest.Forest, names []string) (*forest.Forest, error) {
	if len(names) == 0 {
		return f, nil
	}
	g, n, err := f.WithIntegerFeatures(names)
	if err != nil {
		return nil, err
	}
	fmt.Fprintf(w, "integer features %s: %d thresholds floored (exact for integer inputs; a fraction scores as its ceiling)\n",
		strings.Join(names, ", "), n)
	return g, nil
}
