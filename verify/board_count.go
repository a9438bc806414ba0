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
	"github.com/sawmill-dev/sawmill/forest"
)

// Instructions is what one prediction executes on a board under QEMU.
type Instructions struct {
	Board string  // the variant: "m4", "m0", "rv32"
	Rows  int     // rows measured
	Worst int     // the most instructions one row took
	Mean  float64 // over the rows
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
	return CountInstructionsWith(ctx, p, layout, variant, 0, rows)
}

// CountInstructionsWith is CountInstructions for the build with integer
// leaves of intLeaves bits (ctarget.Options.IntLeaves; 0 for exact leaves).
func CountInstructionsWith(ctx context.Context, p *compile.Program, layout, variant string, intLeaves int, rows *forest.Rows) (*Instructions, error) {
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
	o := boardRunner{IntLeaves: intLeaves}.options(layout, variant)
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
	marks, err := traceMarks(ctx, dir, append(slices.Clone(b.qemu[1:]), "-singlestep", "-d", "exec,nochain", "-kernel", "model.elf"), b.qemu[0])
	if err != nil {
		return nil, fmt.Errorf("%s: %v", b.what, err)
	}
	if len(marks) != 2+2*rows.Len() {
		return nil, fmt.Errorf("%s: %d marks in the execution log, want %d", b.what, len(marks), 2+2*rows.Len())
	}
	base := marks[1] - marks[0]
	in := &Instructions{Board: variant, Rows: rows.Len()}
	total := 0
	for r := 0; r < rows.Len(); r++ {
		n := marks[3+2*r] - marks[2+2*r] - base
		in.Worst = max(in.Worst, n)
		total += n
	}
	if rows.Len() > 0 {
		in.Mean = float64(total) / float64(rows.Len())
	}
	return in, nil
}

// traceMarks runs QEMU with its execution log on stderr and returns the
// numbers of the log lines that enter sawmill_mark.
func traceMarks(ctx context.Context, dir string, args []string, qemu string) ([]int, error) {
	runCtx, cancel := context.WithTimeout(ctx, boardTimeout)
	defer cancel()
	cmd := exec.CommandContext(runCtx, qemu, args...)
	cmd.Dir = dir
	log, err := cmd.StderrPipe()
	if err != nil {
		return nil, err
	}
	if err := cmd.Start(); err != nil {
		return nil, err
	}
	var marks []int
	sc := bufio.NewScanner(log)
	sc.Buffer(make([]byte, 1<<16), 1<<20)
	line, prev := 0, ""
	for sc.Scan() {
		if !strings.HasPrefix(sc.Text(), "Trace ") {
			continue // semihosting's own messages
		}
		line++
		if strings.HasSuffix(sc.Text(), "] sawmill_mark") && !strings.HasSuffix(prev, "] sawmill_mark") {
			marks = append(marks, line)
		}
		prev = sc.Text()
	}
	if err := cmd.Wait(); err != nil {
		return nil, err
	}
	return marks, nil
}
