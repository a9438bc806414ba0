package verify

import (
	"context"
	"debug/elf"
	"encoding/binary"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
)

// M0Flags compile NAME.c for FloatCalls: an ARMv6-M core without FPU, each
// function in its own section so that its calls can be told apart.
var M0Flags = []string{"-std=c99", "-Os", "-mcpu=cortex-m0", "-mthumb", "-mfloat-abi=soft", "-ffunction-sections"}

// FloatCalls compiles p's C under o for a Cortex-M0 (M0Flags) and returns,
// per function of NAME.c, the floating-point routines of libgcc and the C
// library it calls, sorted: on a core without FPU every float or double
// operation is such a call (__aeabi_dcmple, __aeabi_dadd, ...: the Arm
// "Run-time ABI for the Arm Architecture", section 4.1). A function that
// calls none is absent. It reads the object's relocations, one section per
// function. ErrNoARM when arm-none-eabi-gcc is absent.
func FloatCalls(ctx context.Context, p *compile.Program, o ctarget.Options) (map[string][]string, error) {
	if err := boardTools(findBoard("m0")); err != nil {
		return nil, ErrNoARM
	}
	dir, err := os.MkdirTemp("", "sawmill-m0")
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	if _, err := writeC(p, o, dir); err != nil {
		return nil, err
	}
	name := o.Prefix()
	args := append(slices.Clone(M0Flags), "-c", "-o", "model.o", name+".c")
	if err := cCommand(ctx, dir, nil, nil, ARMCompiler, args...); err != nil {
		return nil, err
	}
	return floatCallsOf(filepath.Join(dir, "model.o"))
}

// floatCallsOf reads an ARM object's REL sections: each .rel.text.FN holds
// the symbols FN refers to.
func floatCallsOf(path string) (map[string][]string, error) {
	f, err := elf.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	syms, err := f.Symbols()
	if err != nil {
		return nil, err
	}
	out := map[string][]string{}
	for _, sec := range f.Sections {
		fn, ok := strings.CutPrefix(sec.Name, ".rel.text.")
		if !ok || sec.Type != elf.SHT_REL {
			continue
		}
		data, err := sec.Data()
		if err != nil {
			return nil, err
		}
		for i := 0; i+8 <= len(data); i += 8 {
			s := int(binary.LittleEndian.Uint32(data[i+4:]) >> 8)
			if s < 1 || s > len(syms) {
				return nil, fmt.Errorf("%s: %s: symbol %d out of range", path, sec.Name, s)
			}
			if n := syms[s-1].Name; isFloatRoutine(n) && !slices.Contains(out[fn], n) {
				out[fn] = append(out[fn], n)
			}
		}
		slices.Sort(out[fn])
	}
	return out, nil
}

// isFloatRoutine reports whether a symbol is a floating-point routine: the
// run-time ABI's __aeabi_ ones for double (d), float (f) and the
// conversions (i2d, f2d, ...), gcc's own (__adddf3, __ltsf2, ...), or the
// C library's exp, expf and isnan helpers.
func isFloatRoutine(name string) bool {
	if r, ok := strings.CutPrefix(name, "__aeabi_"); ok {
		return strings.ContainsAny(r[:1], "df") || strings.Contains(r, "2d") || strings.Contains(r, "2f")
	}
	if strings.HasPrefix(name, "__") && (strings.HasSuffix(name, "df2") || strings.HasSuffix(name, "df3") ||
		strings.HasSuffix(name, "sf2") || strings.HasSuffix(name, "sf3") || strings.Contains(name, "sidf") || strings.Contains(name, "sisf")) {
		return true
	}
	return name == "exp" || name == "expf" || name == "__isnan" || name == "__isnanf"
}
