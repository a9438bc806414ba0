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
	// Stack is the stack NAME_predict needs, from gcc's -fstack-usage: its
	// own frame plus the largest frame of another function of NAME.c (the
	// tree functions it calls one at a time); the C library's exp and
	// libgcc's float routines are not counted. -1 when gcc gave no figure
	// or a frame of dynamic size.
	Stack int
}

// Flash is what the object puts in flash: .text + .rodata (+ .data's
// initialisers).
func (o ObjectSize) Flash() int { return o.Text + o.Rodata + o.Data }

// ARMCompiler is the cross compiler MeasureARM runs, and ARMFlags its
// options.
const ARMCompiler = "arm-none-eabi-gcc"

var ARMFlags = []string{"-std=c99", "-Os", "-mcpu=cortex-m4", "-mthumb"}

// M0SizeFlags are the options MeasureBoth compiles the M0 object with: an ARMv6-M core
// without FPU (the Cortex-M0+ has the same instruction set), so floating
// point is libgcc's soft-float calls, which are not counted.
var M0SizeFlags = []string{"-std=c99", "-Os", "-mcpu=cortex-m0", "-mthumb", "-mfloat-abi=soft"}

// stackFlag asks gcc for each function's frame, in model.su.
const stackFlag = "-fstack-usage"

// ErrNoARM is returned by MeasureARM when arm-none-eabi-gcc is not on PATH.
var ErrNoARM = errors.New(ARMCompiler + " is not on PATH")

// CSize is one C layout's static tables and, when measured, its object.
type CSize struct {
	ctarget.Size
	// ARM is the object compiled for a Cortex-M4 (MeasureARM); nil when not
	// measured.
	ARM *ObjectSize
	// M0 is the object compiled for a Cortex-M0 (MeasureBoth); nil when not
	// measured. Its Stack is not measured (-1).
	M0 *ObjectSize
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
	return measureCores(ctx, p, o, m4Object(o))
}

// MeasureBoth is MeasureARM plus each layout's object for a Cortex-M0
// (M0SizeFlags), from the same emitted NAME.c.
func MeasureBoth(ctx context.Context, p *compile.Program, o ctarget.Options) ([]CSize, error) {
	return measureCores(ctx, p, o, m4Object(o), m0Object)
}

// measureCores is CSizes with each layout's objects as builds make them.
func measureCores(ctx context.Context, p *compile.Program, o ctarget.Options, builds ...objectBuild) ([]CSize, error) {
	if _, err := exec.LookPath(ARMCompiler); err != nil {
		return nil, ErrNoARM
	}
	sizes, err := CSizes(p, o)
	if err != nil {
		return nil, err
	}
	if err := eachLayoutObject(ctx, p, o, sizes, builds); err != nil {
		return nil, err
	}
	return sizes, nil
}

// objectBuild is one compilation of NAME.c: the options, and where its
// object's sizes go (set gets the path of gcc's stack usage file too).
type objectBuild struct {
	flags []string
	set   func(s *CSize, obj *ObjectSize, stackFile string)
}

// m4Object is the Cortex-M4 build, with predict's stack.
func m4Object(o ctarget.Options) objectBuild {
	return objectBuild{ARMFlags, func(s *CSize, obj *ObjectSize, su string) {
		obj.Stack = stackUsage(su, o.Prefix()+"_predict")
		s.ARM = obj
	}}
}

// m0Object is the Cortex-M0 build; its stack is not measured.
var m0Object = objectBuild{M0SizeFlags, func(s *CSize, obj *ObjectSize, _ string) {
	obj.Stack = -1
	s.M0 = obj
}}

// eachLayoutObject emits each of sizes' layouts once, in a temporary
// folder it removes, and compiles NAME.c with arm-none-eabi-gcc,
// -fstack-usage and each build's flags, handing the object's sizes to the
// build.
func eachLayoutObject(ctx context.Context, p *compile.Program, o ctarget.Options, sizes []CSize, builds []objectBuild) error {
	dir, err := os.MkdirTemp("", "sawmill-arm")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	for i := range sizes {
		o.Layout = sizes[i].Layout
		sub := filepath.Join(dir, fmt.Sprint(i))
		src, err := writeLayout(p, o, sub)
		if err != nil {
			return err
		}
		for _, b := range builds {
			obj, err := compileObject(ctx, sub, src, b.flags)
			if err != nil {
				return err
			}
			b.set(&sizes[i], obj, filepath.Join(sub, "model.su"))
		}
	}
	return nil
}

// compileObject compiles src in dir to model.o (and model.su) with flags
// and returns the object's sizes.
func compileObject(ctx context.Context, dir, src string, flags []string) (*ObjectSize, error) {
	args := append(append([]string{}, flags...), stackFlag, "-c", "-o", "model.o", src)
	cmd := exec.CommandContext(ctx, ARMCompiler, args...)
	cmd.Dir = dir
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Run(); err != nil {
		return nil, fmt.Errorf("%s %s: %v\n%s", ARMCompiler, strings.Join(args, " "), err, stderr.Bytes())
	}
	obj, err := ObjectSizes(filepath.Join(dir, "model.o"))
	if err != nil {
		return nil, err
	}
	obj.Flags = strings.Join(flags, " ")
	return obj, nil
}

// writeLayout emits o's layout of p into the new folder dir and returns
// the name of its .c file.
func writeLayout(p *compile.Program, o ctarget.Options, dir string) (string, error) {
	files, err := ctarget.Emit(p, o)
	if err != nil {
		return "", err
	}
	if err := os.Mkdir(dir, 0o755); err != nil {
		return "", err
	}
	var src string
	for _, f := range files {
		if err := os.WriteFile(filepath.Join(dir, f.Name), f.Data, 0o644); err != nil {
			return "", err
		}
		if strings.HasSuffix(f.Name, ".c") {
			src = f.Name
		}
	}
	return src, nil
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

// stackUsage reads gcc's -fstack-usage file ("file:line:col:function
// bytes qualifier" per line) and returns predict's frame plus the largest
// other one, -1 when predict is missing or a frame is dynamic.
func stackUsage(path, predict string) int {
	data, err := os.ReadFile(path)
	if err != nil {
		return -1
	}
	own, other := -1, 0
	for _, line := range strings.Split(strings.TrimSpace(string(data)), "\n") {
		f := strings.Split(line, "\t")
		if len(f) != 3 || !strings.HasPrefix(f[2], "static") {
			return -1
		}
		var n int
		if _, err := fmt.Sscan(f[1], &n); err != nil {
			return -1
		}
		if fn := f[0][strings.LastIndex(f[0], ":")+1:]; fn == predict {
			own = n
		} else {
			other = max(other, n)
		}
	}
	if own < 0 {
		return -1
	}
	return own + other
}

// MeasureLayout is MeasureBoth for the one layout o asks for (o.Layout
// resolved, not auto): its tables, its Cortex-M4 object with the stack,
// and its Cortex-M0 object.
func MeasureLayout(ctx context.Context, p *compile.Program, o ctarget.Options) (*CSize, error) {
	if _, err := exec.LookPath(ARMCompiler); err != nil {
		return nil, ErrNoARM
	}
	s, err := ctarget.LayoutSize(p, o)
	if err != nil {
		return nil, err
	}
	sizes := []CSize{{Size: s}}
	if err := eachLayoutObject(ctx, p, o, sizes, []objectBuild{m4Object(o), m0Object}); err != nil {
		return nil, err
	}
	return &sizes[0], nil
}
