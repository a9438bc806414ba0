package verify

import (
	"bytes"
	"context"
	"debug/elf"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
)

// ObjectSize is the size of a compiled NAME.c by kind of section.
type ObjectSize struct {
	Flags  string // the compiler command line's options
	Text   int    // executable sections
	Rodata int    // read-only data (the static const tables, name strings)
	Data   int    // writable data and bss; generated code has none
	// Stack is the sum of every function's frame (-fstack-usage).
	Stack int
}

// Flash is what the object puts in flash: .text + .rodata (+ .data's
// initialisers).
func (o ObjectSize) Flash() int { return o.Text + o.Rodata + o.Data }

// ARMCompiler is the cross compiler MeasureARM runs, and ARMFlags its
// options.
const ARMCompiler = "arm-none-eabi-gcc"

var ARMFlags = []string{"-std=c99", "-Os", "-mcpu=cortex-m4", "-mthumb"}

// ErrNoARM is returned by MeasureARM when arm-none-eabi-gcc is not on PATH.
var ErrNoARM = errors.New(ARMCompiler + " is not on PATH")

// CSize is one C layout's static tables and, when measured, its object.
type CSize struct {
	ctarget.Size
	// ARM is the object compiled for a Cortex-M4 (MeasureARM); nil when not
	// measured.
	ARM *ObjectSize
}

// CSizes is ctarget.Sizes without objects, for when MeasureARM returns
// ErrNoARM.
func CSizes(p *compile.Program, o ctarget.Options) ([]CSize, error) {
	sizes, err := ctarget.Sizes(p, o)
	if err != nil {
		return nil, err
	}
	out := make([]CSize, len(sizes))
	for i, s := range sizes {
		out[i].Size = s
	}
	return out, nil
}

// MeasureARM is CSizes plus, for each layout, the section sizes of NAME.c
// compiled with arm-none-eabi-gcc -std=c99 -Os -mcpu=cortex-m4 -mthumb (an
// object file, not linked: libm and libgcc's float routines are not
// counted). It works in a temporary folder it removes. It returns ErrNoARM
// when the compiler is absent.
func MeasureARM(ctx context.Context, p *compile.Program, o ctarget.Options) ([]CSize, error) {
	if _, err := exec.LookPath(ARMCompiler); err != nil {
		return nil, ErrNoARM
	}
	sizes, err := CSizes(p, o)
	if err != nil {
		return nil, err
	}
	dir, err := os.MkdirTemp("", "sawmill-arm")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	for i := range sizes {
		o.Layout = sizes[i].Layout
		files, err := ctarget.Emit(p, o)
		if err != nil {
			return nil, err
		}
		sub := filepath.Join(dir, o.Layout)
		if err := os.Mkdir(sub, 0o755); err != nil {
			return nil, err
		}
		var src string
		for _, f := range files {
			if err := os.WriteFile(filepath.Join(sub, f.Name), f.Data, 0o644); err != nil {
				return nil, err
			}
			if strings.HasSuffix(f.Name, ".c") {
				src = f.Name
			}
		}
		args := append(append([]string{}, ARMFlags...), "-fstack-usage", "-c", "-o", "model.o", src)
		cmd := exec.CommandContext(ctx, ARMCompiler, args...)
		cmd.Dir = sub
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		if err := cmd.Run(); err != nil {
			return nil, fmt.Errorf("%s %s: %v\n%s", ARMCompiler, strings.Join(args, " "), err, stderr.Bytes())
		}
		obj, err := ObjectSizes(filepath.Join(sub, "model.o"))
		if err != nil {
			return nil, err
		}
		obj.Flags = strings.Join(ARMFlags, " ")
		if obj.Stack, err = stackUsage(sub); err != nil {
			return nil, err
		}
		sizes[i].ARM = obj
	}
	return sizes, nil
}

// ObjectSizes sums the allocated sections of an ELF object by kind.
func ObjectSizes(path string) (*ObjectSize, error) {
	f, err := elf.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	var s ObjectSize
	for _, sec := range f.Sections {
		if sec.Flags&elf.SHF_ALLOC == 0 {
			continue
		}
		n := int(sec.Size)
		switch {
		case sec.Flags&elf.SHF_EXECINSTR != 0:
			s.Text += n
		case sec.Flags&elf.SHF_WRITE != 0:
			s.Data += n
		default:
			s.Rodata += n
		}
	}
	return &s, nil
}
