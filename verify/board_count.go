package verify

import (
	"bufio"
	"context"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// Instructions is what one prediction executes on a board under QEMU.
type Instructions struct {
	Board string  // the variant: "m4", "m0", "rv32"
	Rows  int     // rows measured
	Worst int     // the most instructions one row took
	Mean  float64 // over the rows
	Least int     // the fewest instructions one row took
	// Own counts only the instructions of the emitted code's functions
	// (symbols NAME_...), leaving out the C library's and libgcc's
	// routines (soft-float arithmetic, exp) it calls.
	Own OwnInstructions
}

// OwnInstructions is Instructions' count of the emitted code's own
// instructions.
type OwnInstructions struct {
	Worst, Least int
	Mean         float64
}

// CountInstructions builds p's C in layout for a bare-metal board (a
// variant of the board runner: m4, m4-float, m0, rv32) and counts the
// instructions each prediction of rows executes, NAME_predict with the
// C library's exp and libgcc's float routines it calls. Debian's QEMU 7.2
// ships no TCG plugins, so the count comes from QEMU's own execution log:
// with -singlestep every translation block is one instruction and -d
// exec,nochain logs each block executed, with its symbol; the driver calls
// a marker function before and after each prediction, and the lines
// between two markers, less those of an empty pair measured first, are the
// prediction's instructions (QEMU 7.2 documentation, "-d" and
// "-singlestep"). It is ErrSkip when the cross compiler or QEMU is absent.
func CountInstructions(ctx context.Context, p *compile.Program, layout, variant string, rows *forest.Rows) (*Instructions, error) {
	return countInstructions(ctx, p, boardRunner{}.options(layout, variant), variant, rows)
}

// CountInstructionsWith is CountInstructions for the build with integer
// leaves of intLeaves bits (ctarget.Options.IntLeaves; 0 for exact leaves).
func CountInstructionsWith(ctx context.Context, p *compile.Program, layout, variant string, intLeaves int, rows *forest.Rows) (*Instructions, error) {
	return countInstructions(ctx, p, boardRunner{cEmit: cEmit{IntLeaves: intLeaves}}.options(layout, variant), variant, rows)
}

// CountPacked is CountInstructions for the C with packed bits
// (ctarget.Options.Pack).
func CountPacked(ctx context.Context, p *compile.Program, layout, variant string, rows *forest.Rows) (*Instructions, error) {
	return countInstructions(ctx, p, boardRunner{cEmit: cEmit{Pack: true}}.options(layout, variant), variant, rows)
}

// CountConstantTime is CountInstructions for the constant-time C
// (ctarget.Options.ConstantTime, the binned layout).
func CountConstantTime(ctx context.Context, p *compile.Program, variant string, rows *forest.Rows) (*Instructions, error) {
	return countInstructions(ctx, p, boardRunner{cEmit: cEmit{ConstantTime: true}}.options(emit.Binned, variant), variant, rows)
}

// countInstructions is CountInstructions for the C o describes.
func countInstructions(ctx context.Context, p *compile.Program, o ctarget.Options, variant string, rows *forest.Rows) (*Instructions, error) {
	b := findBoard(variant)
	if b.linux {
		return nil, fmt.Errorf("BUG: verify: CountInstructions runs bare-metal boards, not %s", variant)
	}
	if err := boardTools(b); err != nil {
		return nil, err
	}
	dir, err := os.MkdirTemp("", "sawmill-count")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	ft, err := writeC(p, o, dir)
	if err != nil {
		return nil, err
	}
	src := boardDriverWith(o.Name, ft, false, len(p.Features), p.NumOutputs, true)
	if err := os.WriteFile(filepath.Join(dir, "driver.c"), []byte(src), 0o644); err != nil {
		return nil, err
	}
	if err := os.WriteFile(filepath.Join(dir, boardRowsFile), boardRows(rows), 0o644); err != nil {
		return nil, err
	}
	args := append(slices.Clone(b.flags), "-std=c99", "-o", "model.elf", "driver.c", o.Name+".c")
	if err := cCommand(ctx, dir, nil, nil, b.cc, append(args, b.link...)...); err != nil {
		return nil, err
	}
	marks, own, err := traceMarks(ctx, dir, append(slices.Clone(b.qemu[1:]), "-singlestep", "-d", "exec,nochain", "-kernel", "model.elf"), b.qemu[0], o.Name+"_")
	if err != nil {
		return nil, fmt.Errorf("%s: %v", b.what, err)
	}
	if len(marks) != 2+2*rows.Len() {
		return nil, fmt.Errorf("%s: %d marks in the execution log, want %d", b.what, len(marks), 2+2*rows.Len())
	}
	in := &Instructions{Board: variant, Rows: rows.Len()}
	in.Worst, in.Least, in.Mean = spans(marks, marks[1]-marks[0], rows.Len())
	in.Own.Worst, in.Own.Least, in.Own.Mean = spans(own, own[1]-own[0], rows.Len())
	return in, nil
}

// spans is the worst, least and mean of the n predictions' spans between
// marks (at[2+2r] to at[3+2r]), less base, the span of an empty pair.
func spans(at []int, base, n int) (worst, least int, mean float64) {
	total := 0
	for r := 0; r < n; r++ {
		d := at[3+2*r] - at[2+2*r] - base
		worst = max(worst, d)
		if r == 0 || d < least {
			least = d
		}
		total += d
	}
	if n > 0 {
		mean = float64(total) / float64(n)
	}
	return worst, least, mean
}

// traceMarks runs QEMU with its execution log on stderr and returns the
// numbers of the log lines that enter sawmill_mark and, at each, how many
// lines before it were in a function whose symbol starts with prefix.
func traceMarks(ctx context.Context, dir string, args []string, qemu, prefix string) ([]int, []int, error) {
	runCtx, cancel := context.WithTimeout(ctx, boardTimeout)
	defer cancel()
	cmd := exec.CommandContext(runCtx, qemu, args...)
	cmd.Dir = dir
	log, err := cmd.StderrPipe()
	if err != nil {
		return nil, nil, err
	}
	if err := cmd.Start(); err != nil {
		return nil, nil, err
	}
	var marks, owns []int
	sc := bufio.NewScanner(log)
	sc.Buffer(make([]byte, 1<<16), 1<<20)
	line, own, prev := 0, 0, ""
	for sc.Scan() {
		if !strings.HasPrefix(sc.Text(), "Trace ") {
			continue // semihosting's own messages
		}
		line++
		if strings.HasSuffix(sc.Text(), "] sawmill_mark") && !strings.HasSuffix(prev, "] sawmill_mark") {
			marks = append(marks, line)
			owns = append(owns, own)
		}
		if strings.Contains(sc.Text(), "] "+prefix) {
			own++
		}
		prev = sc.Text()
	}
	if err := cmd.Wait(); err != nil {
		return nil, nil, err
	}
	return marks, owns, nil
}

// CountInstructionsOf is CountInstructions for the C o asks for, on the
// board variant ("m4", "m0", "m4-float", "rv32"); o.Float must match the
// variant's build.
func CountInstructionsOf(ctx context.Context, p *compile.Program, o ctarget.Options, variant string, rows *forest.Rows) (*Instructions, error) {
	if o.Float != findBoard(variant).float {
		return nil, fmt.Errorf("BUG: verify: a float build is %v, board %s's is not", o.Float, variant)
	}
	o.Name, o.Threads = cName, false
	return countInstructions(ctx, p, o, variant, rows)
}
