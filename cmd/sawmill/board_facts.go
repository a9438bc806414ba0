package main

import (
	"context"
	"errors"
	"fmt"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/verify"
)

// boardFacts measures the C that o asks for as inspect --c-sizes does, for
// the one layout o resolves to: its Cortex-M4 and Cortex-M0 objects (flash,
// stack) and, under QEMU, the instructions per prediction over the probe
// rows, and returns them as the lines compile --board-facts writes into
// NAME.h. It fails, naming what to install, when a tool is missing.
func boardFacts(ctx context.Context, p *compile.Program, o ctarget.Options, fl *compileFlags) ([]string, error) {
	layout, _, err := ctarget.Resolve(p, o)
	if err != nil {
		return nil, err
	}
	o.Layout = layout
	if o.Pack && !o.ConstantTime && (layout == emit.Table || layout == emit.Binned) {
		layout += " --pack"
	}
	s, err := verify.MeasureLayout(ctx, p, o)
	if errors.Is(err, verify.ErrNoARM) {
		return nil, fmt.Errorf("--board-facts: %v\nhint: install Debian's gcc-arm-none-eabi and libnewlib-arm-none-eabi (or picolibc-arm-none-eabi), or leave out --board-facts", err)
	}
	if err != nil {
		return nil, fmt.Errorf("--board-facts: %v", err)
	}
	stack := "not measured (gcc gave no static figure)"
	if s.ARM.Stack >= 0 {
		stack = fmt.Sprintf("%d B", s.ARM.Stack)
	}
	facts := []string{
		fmt.Sprintf("Measured by sawmill compile --board-facts, %s layout, %s.c alone (the C", layout, o.Prefix()),
		"library and libgcc's float routines not counted):",
		fmt.Sprintf("  Cortex-M4 (%s %s): flash %d B (.text %d, .rodata %d),", verify.ARMCompiler, s.ARM.Flags, s.ARM.Flash(), s.ARM.Text, s.ARM.Rodata),
		fmt.Sprintf("  RAM %d B static, stack %s for %s_predict and the deepest function it calls;", s.ARM.Data, stack, o.Prefix()),
		fmt.Sprintf("  Cortex-M0 (%s %s): flash %d B (.text %d, .rodata %d).", verify.ARMCompiler, s.M0.Flags, s.M0.Flash(), s.M0.Text, s.M0.Rodata),
	}
	counts, err := boardCounts(ctx, p, o, fl)
	if err != nil {
		return nil, err
	}
	return append(facts, counts...), nil
}

// boardCounts are the facts' lines on instructions per prediction: on the
// Cortex-M4 and M0 for a double build, the Cortex-M4F for a float one.
func boardCounts(ctx context.Context, p *compile.Program, o ctarget.Options, fl *compileFlags) ([]string, error) {
	rows := countingRows(fl.model)
	boards := [][2]string{{"m4", "Cortex-M4F -Os (double in libgcc: its FPU is single)"}, {"m0", "Cortex-M0 -Os"}}
	if o.Float {
		boards = [][2]string{{"m4-float", "Cortex-M4F -O2 (float in its FPU)"}}
	}
	lines := []string{fmt.Sprintf("Instructions per prediction under QEMU over %d probe rows, mean / worst", rows.Len()),
		"(the float routines and exp included):"}
	for _, b := range boards {
		in, err := verify.CountInstructionsOf(ctx, p, o, b[0], rows)
		if errors.Is(err, verify.ErrSkip) {
			return nil, fmt.Errorf("--board-facts: %v\nhint: .ci/setup installs them, or leave out --board-facts", err)
		}
		if err != nil {
			return nil, fmt.Errorf("--board-facts: %s: %v", b[1], err)
		}
		lines = append(lines, fmt.Sprintf("  %s %.0f / %d.", b[1], in.Mean, in.Worst))
	}
	return lines, nil
}
