package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

// countRows is how many probe rows inspect --c-sizes runs under QEMU to
// count instructions per prediction.
const countRows = 32

// printCSizes reports, for C in double and in float, each layout's static
// tables in bytes, the most splits a prediction tests and, when
// arm-none-eabi-gcc is on PATH, the flash the object takes on a Cortex-M4
// (.text + .rodata, compiled -Os -mthumb) and predict's stack; and when
// QEMU is there too, instructions per prediction on the Cortex-M4 and (for
// double) the Cortex-M0, mean and worst over the first probe rows. With
// intLeaves, the double build with integer leaves of that many bits too;
// and the table and binned layouts with packed bits, double and float.
func printCSizes(ctx context.Context, w io.Writer, path string, f *forest.Forest, intLeaves int) error {
	tw := tabwriter.NewWriter(w, 2, 8, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "C\tlayout\ttable bytes\tbytes/node\tsplits\tCortex-M4 .text\t.rodata\tflash\tstack\tM0 flash\tM4 instr mean\tworst\tM0 instr mean\tworst\t")
	rows := countingRows(f)
	var notes []string
	builds := []ctarget.Options{{}, {Float: true}}
	if intLeaves != 0 {
		builds = append(builds, ctarget.Options{IntLeaves: intLeaves})
	}
	builds = append(builds, ctarget.Options{Pack: true}, ctarget.Options{Pack: true, Float: true})
	for _, o := range builds {
		float := o.Float
		p, _, err := compile.Compile(f, ctarget.Target().CompileOptions(float))
		if err != nil {
			return fmt.Errorf("%s: %v", path, err)
		}
		sizes, err := verify.MeasureBoth(ctx, p, o)
		if errors.Is(err, verify.ErrNoARM) {
			notes = appendOnce(notes, fmt.Sprintf("(%s is not on PATH: no Cortex-M4 or M0 sizes)", verify.ARMCompiler))
			sizes, err = verify.CSizes(p, o)
		}
		if err != nil {
			return err
		}
		kind, boards := "double", []string{"m4", "m0"}
		if float {
			kind, boards = "float", []string{"m4-float"}
		}
		if o.IntLeaves != 0 {
			kind = fmt.Sprintf("%s int%d", kind, o.IntLeaves)
		}
		if o.Pack {
			kind += " packed"
		}
		if o.IntLeaves == 0 && !o.Pack {
			ct, err := constantTimeSize(ctx, p, o)
			var u *emit.Unsupported
			switch {
			case errors.As(err, &u):
				notes = appendOnce(notes, fmt.Sprintf("(no %s row: %s)", ctLayout, u.Where+": "+u.Construct))
			case err != nil:
				return err
			}
			sizes = append(sizes, ct...)
		}
		for _, s := range sizes {
			if err := printSizeRow(ctx, tw, p, s, kind, float, o, boards, rows, &notes); err != nil {
				return err
			}
		}
	}
	tw.Flush()
	fmt.Fprintf(w, "splits: the most one prediction tests (the sum of the trees' depths); stack: predict's bytes from gcc -fstack-usage, the C library not counted;\n")
	fmt.Fprintf(w, "flash: .text + .rodata of NAME.c alone (-Os -mthumb; Cortex-M4 %s, M0 %s), libgcc's float routines and the C library not counted;\n", verify.ARMFlags[2], verify.M0SizeFlags[2])
	fmt.Fprintf(w, "instructions: per prediction under QEMU (Cortex-M4F mps2-an386, Cortex-M0 microbit), exp and float routines included, over %d probe rows\n", rows.Len())
	fmt.Fprintf(w, "packed: the table and binned layouts with --pack (split words, leaf rows and class counts at the bits the model needs)\n")
	fmt.Fprintf(w, "binned-ct: the binned layout with --constant-time; its splits are tested on every prediction, and its code's own instructions are the same for every row (the float routines' vary)\n")
	for _, n := range notes {
		fmt.Fprintln(w, n)
	}
	return nil
}

// ctLayout labels the constant-time row.
const ctLayout = "binned-ct"

// constantTimeSize measures the constant-time C as MeasureARM measures the
// layouts, labelled ctLayout; an error where constant time refuses the
// model (set splits), which leaves the row out.
func constantTimeSize(ctx context.Context, p *compile.Program, o ctarget.Options) ([]verify.CSize, error) {
	o.ConstantTime = true
	sizes, err := verify.MeasureBoth(ctx, p, o)
	if errors.Is(err, verify.ErrNoARM) {
		sizes, err = verify.CSizes(p, o)
	}
	for i := range sizes {
		sizes[i].Layout = ctLayout
	}
	return sizes, err
}

// printSizeRow prints one layout's row: its tables, the splits, the
// Cortex-M4 object when measured and the instructions per prediction on
// boards.
func printSizeRow(ctx context.Context, tw io.Writer, p *compile.Program, s verify.CSize, kind string, float bool, o ctarget.Options, boards []string, rows *forest.Rows, notes *[]string) error {
	arm := "\t\t\t\t"
	if s.ARM != nil && s.M0 != nil {
		arm = fmt.Sprintf("%d\t%d\t%d\t%d\t%d", s.ARM.Text, s.ARM.Rodata, s.ARM.Flash(), s.ARM.Stack, s.M0.Flash())
	}
	counts := ""
	for _, b := range boards {
		var in *verify.Instructions
		var err error
		switch {
		case s.Layout == ctLayout:
			in, err = verify.CountConstantTime(ctx, p, b, rows)
		case o.Pack:
			in, err = verify.CountPacked(ctx, p, s.Layout, b, rows)
		default:
			in, err = verify.CountInstructionsWith(ctx, p, s.Layout, b, o.IntLeaves, rows)
		}
		switch {
		case errors.Is(err, verify.ErrSkip):
			*notes = appendOnce(*notes, fmt.Sprintf("(no instruction counts: %v)", err))
			counts += "\t\t"
		case err != nil:
			return err
		default:
			counts += fmt.Sprintf("%.0f\t%d\t", in.Mean, in.Worst)
		}
	}
	if float {
		counts += "\t\t"
	}
	fmt.Fprintf(tw, "%s\t%s\t%d\t%.2f\t%d\t%s\t%s\n", kind, s.Layout, s.TableBytes, s.BytesPerNode(), s.WorstSplits, arm, counts)
	return nil
}

// countingRows are the first countRows probe rows verify generates (leaf
// rows first, so each reaches a different leaf).
func countingRows(f *forest.Forest) *forest.Rows {
	leaves, thresholds, _ := verify.ProbeRows(f, countRows)
	rows := &forest.Rows{Features: f.Features}
	for _, x := range append(leaves, thresholds...) {
		rows.Values = append(rows.Values, x...)
		rows.Line = append(rows.Line, 0)
	}
	return rows
}

func appendOnce(list []string, s string) []string {
	for _, x := range list {
		if x == s {
			return list
		}
	}
	return append(list, s)
}
