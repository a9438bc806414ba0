package verify

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
)

// Budget is what a C build may take on the board, in bytes; 0 is no limit.
type Budget struct {
	Flash int // .text + .rodata + .data of NAME.c
	RAM   int // .data and .bss, plus the stack of a prediction
}

// BudgetRow is one C layout measured for a budget.
type BudgetRow struct {
	Layout string
	// Flash is the Cortex-M4 object's flash (MeasureARM) when Measured,
	// else the static tables alone (ctarget.Sizes: code not counted, so a
	// lower bound).
	Flash int
	// RAM is the object's .data and .bss plus the stack of a prediction
	// (ObjectSize.Stack: NAME_predict's frame and the largest frame it
	// calls; nothing in NAME.c recurses); -1 when not measured.
	RAM      int
	Measured bool
	// Pack: the layout with packed bits (ctarget.Options.Pack).
	Pack bool
}

// Name is the row's layout, with " --pack" for packed bits.
func (r BudgetRow) Name() string {
	if r.Pack {
		return r.Layout + " --pack"
	}
	return r.Layout
}

// Miss is by how many bytes r misses b's flash and RAM (0 when it fits;
// RAM is 0 when not measured: see Fits).
func (r BudgetRow) Miss(b Budget) (flash, ram int) {
	if b.Flash > 0 && r.Flash > b.Flash {
		flash = r.Flash - b.Flash
	}
	if b.RAM > 0 && r.RAM > b.RAM {
		ram = r.RAM - b.RAM
	}
	return flash, ram
}

// Fits reports whether r is within b: it misses neither, and its RAM is
// known wherever b bounds RAM.
func (r BudgetRow) Fits(b Budget) bool {
	fm, rm := r.Miss(b)
	return fm == 0 && rm == 0 && (b.RAM == 0 || r.RAM >= 0)
}

// BudgetError is FitBudget's failure: no layout fits; Rows says by how
// much each misses.
type BudgetError struct {
	Budget Budget
	Rows   []BudgetRow
}

func (e *BudgetError) Error() string {
	var parts []string
	for _, r := range e.Rows {
		fm, rm := r.Miss(e.Budget)
		var why []string
		if fm > 0 {
			why = append(why, fmt.Sprintf("flash by %d bytes (%d of %d%s)", fm, r.Flash, e.Budget.Flash, map[bool]string{false: ", tables alone"}[r.Measured]))
		}
		if rm > 0 {
			why = append(why, fmt.Sprintf("RAM by %d bytes (%d of %d)", rm, r.RAM, e.Budget.RAM))
		}
		if e.Budget.RAM > 0 && r.RAM < 0 {
			why = append(why, "RAM unknown (gcc gave no static stack figure)")
		}
		parts = append(parts, fmt.Sprintf("  %s misses %s", r.Name(), strings.Join(why, " and ")))
	}
	return "no exact C layout fits the budget:\n" + strings.Join(parts, "\n") +
		"\nhint: train with fewer or shallower trees, or --max-bins, or compile --float"
}

// ErrRAMUnmeasured is FitBudget's error for a RAM budget without
// arm-none-eabi-gcc, which measures the stack.
var ErrRAMUnmeasured = errors.New("a RAM budget needs " + ARMCompiler + " on PATH (the stack comes from its -fstack-usage)")

// FitBudget measures the layouts (o.Layout alone when it names one, every
// exact layout for emit.Auto or ""), the table and binned ones also with
// packed bits, and returns the row of least flash that fits b, with every
// row measured (o.Pack measures packed rows only). Flash is the Cortex-M4
// object's where arm-none-eabi-gcc is on PATH, else the static tables
// alone. A layout the model cannot take (binned with set splits) is left
// out.
func FitBudget(ctx context.Context, p *compile.Program, o ctarget.Options, b Budget) (BudgetRow, []BudgetRow, error) {
	rows, err := budgetRows(ctx, p, o, b)
	if err != nil || o.Pack {
		return pickRow(rows, b, err)
	}
	o.Pack = true
	packed, err := budgetRows(ctx, p, o, b)
	return pickRow(append(rows, packed...), b, err)
}

// pickRow is the row of least flash that fits b.
func pickRow(rows []BudgetRow, b Budget, err error) (BudgetRow, []BudgetRow, error) {
	if err != nil {
		return BudgetRow{}, nil, err
	}
	best := -1
	for i, r := range rows {
		if r.Fits(b) && (best < 0 || r.Flash < rows[best].Flash) {
			best = i
		}
	}
	if best < 0 {
		return BudgetRow{}, rows, &BudgetError{Budget: b, Rows: rows}
	}
	return rows[best], rows, nil
}

// budgetRows measures the layouts o asks for.
func budgetRows(ctx context.Context, p *compile.Program, o ctarget.Options, b Budget) ([]BudgetRow, error) {
	sizes, err := MeasureARM(ctx, p, o)
	measured := err == nil
	if errors.Is(err, ErrNoARM) {
		if b.RAM > 0 {
			return nil, ErrRAMUnmeasured
		}
		sizes, err = CSizes(p, o)
	}
	if err != nil {
		return nil, err
	}
	var rows []BudgetRow
	for _, s := range sizes {
		if o.Layout != "" && o.Layout != "auto" && s.Layout != o.Layout {
			continue
		}
		r := BudgetRow{Layout: s.Layout, Flash: s.TableBytes, RAM: -1, Measured: measured, Pack: o.Pack}
		if s.ARM != nil {
			r.Flash = s.ARM.Flash()
			if s.ARM.Stack >= 0 {
				r.RAM = s.ARM.Data + s.ARM.Stack
			}
		}
		rows = append(rows, r)
	}
	return rows, nil
}
