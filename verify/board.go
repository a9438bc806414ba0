package verify

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// BoardRunnerName is the name of the runner that builds emitted C for the
// processors firmware ships on and runs it under QEMU (boardRunner).
const BoardRunnerName = "c-board"

// boardRunner builds emitted C with a cross compiler for one processor per
// variant and runs it under QEMU: a Cortex-M4 with its single-precision FPU
// (QEMU machine mps2-an386), the same in float mode, a Cortex-M0 without FPU
// (microbit: ARMv6-M, the instruction set of the M0+, which faults on
// unaligned loads as the M0+ does; 256 KiB flash and 16 KiB RAM), a 32-bit
// RISC-V without FPU (rv32imac on virt), all three bare metal with
// picolibc and semihosting for I/O, and AArch64 Linux (a static glibc
// binary under qemu-aarch64). The bare-metal driver (boardDriver) reads the
// rows as float64 bit patterns over semihosting a few at a time, so RAM
// bounds nothing but one chunk, and writes every output's bit pattern in
// hex; outputs are compared bit for bit, as the host C runner's are, within
// the same ctarget.ErrorBound where a transform calls the C library's exp.
type boardRunner struct {
	// Werror is Config's.
	Werror bool
	// Quick runs each board in one layout (LayoutsFor), to keep CI short.
	Quick bool
	cEmit
}

// boardQuickLayouts is the layout each board runs in when Quick: the
// binned layout (integer walk, packed words that a core without an FPU
// must read with aligned loads) on the Cortex-M0 and RV32, the table layout
// on the float M4 and AArch64, nested on the M4. A model binned refuses
// (set splits) is declined on those two boards.
var boardQuickLayouts = map[string]string{"m4": "nested", "m4-float": "table", "m0": "binned", "rv32": "binned", "arm64": "table"}

// LayoutsFor is the layouts variant runs in: every C layout, or with Quick
// the one of boardQuickLayouts.
func (r boardRunner) LayoutsFor(variant string) []string {
	if r.Quick {
		l := boardQuickLayouts[variant]
		if r.IntLeaves != 0 && l == emit.Nested {
			l = emit.Table // integer leaves are stored in tables
		}
		return []string{l}
	}
	return r.Layouts()
}

// board is one processor the runner builds for.
type board struct {
	variant string
	what    string   // for Result.Toolchain
	cc      string   // cross compiler
	flags   []string // code generation flags, before the warnings
	link    []string // link flags
	qemu    []string // the emulator and its machine arguments; the image follows
	float   bool     // ctarget.Options.Float
	linux   bool     // a Linux binary: the host driver, run by qemu-user
	pkgs    string   // the Debian packages that hold cc and qemu
}

// picolibcLink links a bare-metal image with picolibc's start-up code and
// its semihosting library, placing flash and RAM where QEMU's machine has
// them (picolibc.ld reads the four symbols).
func picolibcLink(flash, flashSize, ram, ramSize, stack uint32) []string {
	return []string{"--specs=picolibc.specs", "--oslib=semihost", "-T", "picolibc.ld",
		fmt.Sprintf("-Wl,--defsym=__flash=%#x", flash), fmt.Sprintf("-Wl,--defsym=__flash_size=%#x", flashSize),
		fmt.Sprintf("-Wl,--defsym=__ram=%#x", ram), fmt.Sprintf("-Wl,--defsym=__ram_size=%#x", ramSize),
		fmt.Sprintf("-Wl,--defsym=__stack_size=%#x", stack)}
}

// semihosting are QEMU's arguments for a bare-metal run: no display, no
// monitor or serial port, semihosting I/O on the host's files.
var semihosting = []string{"-nographic", "-monitor", "none", "-serial", "none",
	"-semihosting-config", "enable=on,target=native"}

// boards are the variants. Memory maps: MPS2 AN386 has 4 MiB of code SRAM
// at 0 and 4 MiB of data SRAM at 0x20000000 (Arm, "Application Note AN386",
// memory map); the micro:bit's nRF51822 has 256 KiB of flash at 0 and
// 16 KiB of RAM at 0x20000000 (Nordic nRF51822 product specification,
// section 6); QEMU's RISC-V virt board has its RAM from 0x80000000 (QEMU
// 7.2 documentation, "RISC-V 'virt' generic virtual platform").
var boards = []board{
	{variant: "m4", what: "Cortex-M4F (qemu-system-arm -M mps2-an386)", cc: "arm-none-eabi-gcc",
		flags: []string{"-mcpu=cortex-m4", "-mthumb", "-mfloat-abi=hard", "-mfpu=fpv4-sp-d16", "-Os"},
		link:  picolibcLink(0, 4<<20, 0x20000000, 4<<20, 16<<10),
		qemu:  append([]string{"qemu-system-arm", "-M", "mps2-an386"}, semihosting...),
		pkgs:  "gcc-arm-none-eabi, picolibc-arm-none-eabi, qemu-system-arm"},
	{variant: "m4-float", what: "Cortex-M4F float (qemu-system-arm -M mps2-an386)", cc: "arm-none-eabi-gcc",
		flags: []string{"-mcpu=cortex-m4", "-mthumb", "-mfloat-abi=hard", "-mfpu=fpv4-sp-d16", "-O2"},
		link:  picolibcLink(0, 4<<20, 0x20000000, 4<<20, 16<<10),
		qemu:  append([]string{"qemu-system-arm", "-M", "mps2-an386"}, semihosting...), float: true,
		pkgs: "gcc-arm-none-eabi, picolibc-arm-none-eabi, qemu-system-arm"},
	{variant: "m0", what: "Cortex-M0 (qemu-system-arm -M microbit)", cc: "arm-none-eabi-gcc",
		flags: []string{"-mcpu=cortex-m0", "-mthumb", "-mfloat-abi=soft", "-Os"},
		link:  picolibcLink(0, 256<<10, 0x20000000, 16<<10, 8<<10),
		qemu:  append([]string{"qemu-system-arm", "-M", "microbit"}, semihosting...),
		pkgs:  "gcc-arm-none-eabi, picolibc-arm-none-eabi, qemu-system-arm"},
	{variant: "rv32", what: "RV32IMAC (qemu-system-riscv32 -M virt)", cc: "riscv64-unknown-elf-gcc",
		flags: []string{"-march=rv32imac", "-mabi=ilp32", "-mcmodel=medany", "-O2"},
		link:  picolibcLink(0x80000000, 4<<20, 0x80400000, 4<<20, 16<<10),
		qemu:  append([]string{"qemu-system-riscv32", "-M", "virt", "-bios", "none"}, semihosting...),
		pkgs:  "gcc-riscv64-unknown-elf, picolibc-riscv64-unknown-elf, qemu-system-misc"},
	{variant: "arm64", what: "AArch64 Linux (qemu-aarch64)", cc: "aarch64-linux-gnu-gcc",
		flags: []string{"-O2", "-static"}, link: []string{"-lm"},
		qemu: []string{"qemu-aarch64"}, linux: true,
		pkgs: "gcc-aarch64-linux-gnu, qemu-user"},
}

func findBoard(variant string) board {
	for _, b := range boards {
		if b.variant == variant {
			return b
		}
	}
	panic("BUG: verify: no board " + variant)
}

func (boardRunner) Name() string { return BoardRunnerName }

// Layouts are every C layout but perfect and block, which are for batch
// scoring on desktops and servers: a block of their keys takes 32 KiB of
// stack or more, more than some boards' RAM.
func (boardRunner) Layouts() []string {
	return slices.DeleteFunc(ctarget.Layouts(), func(l string) bool { return l == ctarget.Perfect || l == ctarget.Block })
}

// Variants are the processors: m4, m4-float, m0, rv32, arm64.
func (boardRunner) Variants() []string {
	var v []string
	for _, b := range boards {
		v = append(v, b.variant)
	}
	return v
}

func (boardRunner) CompileOptions(variant string) compile.Options {
	return ctarget.Target().CompileOptions(findBoard(variant).float)
}

// Float32Inputs: the float variant takes float inputs, as the C runner's.
func (boardRunner) Float32Inputs(variant string) bool { return findBoard(variant).float }

// Tolerance is the C runner's: the board's C library's exp is within the
// same 1 ulp that ctarget.ErrorBound assumes of any.
func (r boardRunner) Tolerance(variant string, p *compile.Program) (bool, float64) {
	return cRunner{cEmit: cEmit{IntLeaves: r.IntLeaves}}.Tolerance(map[bool]string{true: "float", false: "double"}[findBoard(variant).float], p)
}

func (r boardRunner) options(layout, variant string) ctarget.Options {
	return r.cEmit.options(layout, findBoard(variant).float)
}

// boardTools reports the first of b's tools that is not on PATH, or a
// bare-metal compiler without picolibc, as ErrSkip naming the Debian
// packages.
func boardTools(b board) error {
	for _, t := range []string{b.cc, b.qemu[0]} {
		if _, err := exec.LookPath(t); err != nil {
			return fmt.Errorf("%w: %s is not on PATH (Debian packages %s)", ErrSkip, t, b.pkgs)
		}
	}
	if b.linux {
		return nil
	}
	// gcc prints the name alone when it finds no such file.
	out, err := exec.Command(b.cc, "-print-file-name=picolibc.specs").Output()
	if err != nil || strings.TrimSpace(string(out)) == "picolibc.specs" {
		return fmt.Errorf("%w: %s has no picolibc.specs (Debian packages %s)", ErrSkip, b.cc, b.pkgs)
	}
	return nil
}

func (r boardRunner) Score(ctx context.Context, p *compile.Program, layout, variant string, rows *forest.Rows, dir string) (*Result, error) {
	b := findBoard(variant)
	if err := boardTools(b); err != nil {
		return nil, err
	}
	if b.float {
		if err := ctarget.FitsFloat(p); err != nil {
			return nil, fmt.Errorf("%w: float C: %v", ErrDeclined, err)
		}
	}
	o := r.options(layout, variant)
	o.Threads = b.linux // the host's driver checks NAME_predict_batch_threads too
	ft, err := writeC(p, o, dir)
	if err != nil {
		return nil, err
	}
	st, err := ctarget.Selftest(p, o, boardProbes(p, rows, b.float))
	if err != nil {
		return nil, err
	}
	if err := os.WriteFile(filepath.Join(dir, st.Name), st.Data, 0o644); err != nil {
		return nil, err
	}
	driver, input := boardDriver(o.Name, ft, p.IsClassifier(), len(p.Features), p.NumOutputs), boardRows(rows)
	if b.linux {
		driver, input = cDriver(o.Name, ft, p.IsClassifier()), cRows(rows)
	}
	if err := os.WriteFile(filepath.Join(dir, "driver.c"), []byte(driver), 0o644); err != nil {
		return nil, err
	}
	if err := os.WriteFile(filepath.Join(dir, boardRowsFile), input, 0o644); err != nil {
		return nil, err
	}
	return r.buildAndRun(ctx, p, b, o.Name, rows.Len(), dir)
}

// buildAndRun compiles driver.c and NAME.c for b, runs the image and
// parses what it printed.
func (r boardRunner) buildAndRun(ctx context.Context, p *compile.Program, b board, name string, n int, dir string) (*Result, error) {
	cJobs <- struct{}{}
	defer func() { <-cJobs }()
	args := append(slices.Clone(b.flags), "-std=c99")
	args = append(args, cRunner{Werror: r.Werror}.warnings()...)
	args = append(args, "-o", "model.elf", "driver.c", name+".c", ctarget.SelftestFile(name))
	if b.linux {
		args = append(args, name+"_threads.c", "-pthread")
	}
	args = append(args, b.link...)
	start := time.Now()
	if err := cCommand(ctx, dir, nil, nil, b.cc, args...); err != nil {
		if m := overflowRE.FindString(err.Error()); m != "" {
			return nil, fmt.Errorf("%w: %s: the model and the driver do not fit the board's memory: %s", ErrDeclined, b.what, m)
		}
		return nil, err
	}
	res := &Result{Build: time.Since(start)}
	res.Toolchain = fmt.Sprintf("%s: %s %s", b.what, ccVersion(b.cc), strings.Join(b.flags, " "))
	if !b.linux {
		res.Toolchain += ", picolibc, semihosting"
	}
	runCtx, cancel := context.WithTimeout(ctx, boardTimeout)
	defer cancel()
	var stdout bytes.Buffer
	t0 := time.Now()
	var err error
	if b.linux {
		err = cCommand(runCtx, dir, nil, &stdout, b.qemu[0], "./model.elf", boardRowsFile)
	} else {
		err = cCommand(runCtx, dir, nil, &stdout, b.qemu[0], append(b.qemu[1:], "-kernel", "model.elf")...)
	}
	res.Run = time.Since(t0)
	if errors.Is(runCtx.Err(), context.DeadlineExceeded) {
		return nil, fmt.Errorf("%s: no exit within %v (a fault loops in the handler): %v", b.what, boardTimeout, err)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %v", b.what, err)
	}
	if b.linux {
		return res, parseCOutput(stdout.Bytes(), p, n, res)
	}
	out, err := os.ReadFile(filepath.Join(dir, "out.txt"))
	if err != nil {
		return nil, fmt.Errorf("%s: the image wrote no outputs: %v", b.what, err)
	}
	run := res.Run // parseGoOutput takes the first line for the run time
	err = parseGoOutput(bytes.NewBuffer(append([]byte("0\n"), out...)), p, n, res)
	res.Run = run
	return res, err
}

// overflowRE finds the linker's word that an image does not fit.
var overflowRE = regexp.MustCompile("region `[a-z]+' overflowed by [0-9]+ bytes")

// boardSelftestRows is how many of the rows a board run also hands to
// NAME_selftest.c, which the driver runs after scoring them.
const boardSelftestRows = 32

// boardProbes are the first boardSelftestRows rows (rounded to float for
// float C) with the program's own outputs (compile.Eval, which the
// pipeline's tests hold bit for bit to the interpreter) and classes.
func boardProbes(p *compile.Program, rows *forest.Rows, float bool) []ctarget.Probe {
	var out []ctarget.Probe
	for i := 0; i < min(rows.Len(), boardSelftestRows); i++ {
		x := slices.Clone(rows.Row(i))
		if float {
			for j, v := range x {
				x[j] = float64(float32(v))
			}
		}
		want := make([]float64, p.NumOutputs)
		compile.Eval(p, x, want)
		pr := ctarget.Probe{X: x, Want: want, Class: -1}
		switch {
		case p.IsClassifier() && p.NumOutputs == 1 && want[0] > 0.5:
			pr.Class = 1
		case p.IsClassifier() && p.NumOutputs == 1:
			pr.Class = 0
		case p.IsClassifier():
			pr.Class = forest.Argmax(want)
		}
		out = append(out, pr)
	}
	return out
}

// boardTimeout bounds one run under QEMU: a fault ends in picolibc's
// handler, which reports it and exits, but a wild jump may loop.
const boardTimeout = 2 * time.Minute

// boardRows is the rows file the bare-metal driver reads: the number of
// rows and of features as little-endian uint32, then every value's float64
// bit pattern as a little-endian uint64, row after row.
func boardRows(rows *forest.Rows) []byte {
	b := make([]byte, 8, 8+8*len(rows.Values))
	binary.LittleEndian.PutUint32(b, uint32(rows.Len()))
	binary.LittleEndian.PutUint32(b[4:], uint32(len(rows.Features)))
	for _, v := range rows.Values {
		b = binary.LittleEndian.AppendUint64(b, math.Float64bits(v))
	}
	return b
}
