package main

import (
	"sawmill/compile"
	"sawmill/emit"
	"sawmill/emit/sql"
)

// sqlTarget emits one statement through emit/sql.
func sqlTarget() target {
	return target{
		name:    "sql",
		options: func(*compileFlags) compile.Options { return compile.Options{} },
		emit: func(p *compile.Program, fl *compileFlags) ([]emit.File, error) {
			d, err := sql.ParseDialect(fl.dialect)
			if err != nil {
				return nil, err
			}
			layout := fl.layout
			return sql.Emit(p, sql.Options{Dialect: d, Table: fl.table, Keep: fl.keep, View: fl.view, Layout: layout})
		},
	}
}
