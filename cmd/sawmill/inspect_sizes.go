package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

// printCSizes reports, for C in double and in float, each layout's static
// tables in bytes and, when arm-none-eabi-gcc is on PATH, the flash the
// object takes on a Cortex-M4 (.text + .rodata, compiled -Os -mthumb).
func printCSizes(ctx context.Context, w io.Writer, path string, f *forest.Forest) error {
	tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "C\tlayout\ttable bytes\tbytes/node\tCortex-M4 .text\t.rodata\tflash\t")
	noARM := false
	for _, float := range []bool{false, true} {
		p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(float))
		if err != nil {
			return fmt.Errorf("%s: %v", path, err)
		}
		o := ctarget.Options{Float: float}
		sizes, err := verify.MeasureARM(ctx, p, o)
		if errors.Is(err, verify.ErrNoARM) {
			noARM = true
			sizes, err = verify.CSizes(p, o)
		}
		if err != nil {
			return err
		}
		kind := "double"
		if float {
			kind = "float"
		}
		for _, s := range sizes {
			arm := "\t\t"
			if s.ARM != nil {
				arm = fmt.Sprintf("%d\t%d\t%d", s.ARM.Text, s.ARM.Rodata, s.ARM.Flash())
			}
			fmt.Fprintf(tw, "%s\t%s\t%d\t%.2f\t%s\t\n", kind, s.Layout, s.TableBytes, s.BytesPerNode(), arm)
		}
	}
	tw.Flush()
	if noARM {
		fmt.Fprintf(w, "(%s is not on PATH: no Cortex-M4 sizes)\n", verify.ARMCompiler)
	}
	return nil
}
