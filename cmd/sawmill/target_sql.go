package main

import (
	"fmt"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/verify"
)

// emitSQL emits one statement through emit/sqltarget and, with --selftest,
// the self-test script beside it.
func emitSQL(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
	d, err := sqltarget.ParseDialect(fl.dialect)
	if err != nil {
		return nil, err
	}
	if fl.maxNest < 0 || fl.maxNest == 1 {
		return nil, fmt.Errorf("--max-nest %d: must be 2 or more (0: the dialect's default)", fl.maxNest)
	}
	cols, err := columnMap(p, fl.columns)
	if err != nil {
		return nil, err
	}
	o := sqltarget.Options{Dialect: d, Table: fl.table, Keep: fl.keep, View: fl.view, Layout: fl.layout, MaxNest: fl.maxNest, Columns: cols, Function: fl.function}
	if fl.function != "" && fl.selftest {
		return nil, fmt.Errorf("--selftest checks the query form: leave out --function, or --selftest (sawmill verify --dialect %s runs the functions)", d)
	}
	files, err := sqltarget.Emit(p, o)
	files = sqltarget.Named(files, fl.name)
	if err != nil || !fl.selftest {
		return files, err
	}
	probes := verify.SelftestProbes(fl.model)
	st, err := sqltarget.Selftest(p, o, probes)
	if err != nil {
		return nil, fmt.Errorf("selftest: %v", err)
	}
	return append(files, st), nil
}

// columnMap turns --columns feature=column pairs into sqltarget.Options.Columns:
// the column of every feature, its own name where no pair names it.
func columnMap(p *compile.Program, pairs []string) ([]string, error) {
	if len(pairs) == 0 {
		return nil, nil
	}
	cols := make([]string, len(p.Features))
	index := map[string]int{}
	for i, f := range p.Features {
		cols[i] = f.Name
		index[f.Name] = i
	}
	seen := map[string]bool{}
	for _, pair := range pairs {
		feat, col, ok := strings.Cut(pair, "=")
		if !ok || col == "" {
			return nil, fmt.Errorf("--columns %q: want feature=column", pair)
		}
		i, known := index[feat]
		if !known {
			return nil, fmt.Errorf("--columns %q: the model has no feature %q", pair, feat)
		}
		if seen[feat] {
			return nil, fmt.Errorf("--columns: feature %q is mapped twice", feat)
		}
		seen[feat] = true
		cols[i] = col
	}
	return cols, nil
}
