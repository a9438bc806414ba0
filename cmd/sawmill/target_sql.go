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
			files, err := sql.Emit(p, sql.Options{Dialect: d, Table: fl.table, Keep: fl.keep, View: fl.view, Layout: layout})
			return sqlFileName(files, fl.name), err
		},
	}
}

// sqlFileName names the statement's file NAME.sql after --name; without it
// the file keeps the emitter's name (score.sql).
func sqlFileName(files []emit.File, name string) []emit.File {
	for i := range files {
		if name != "" && files[i].Name == sql.FileName {
			files[i].Name = name + ".sql"
		}
	}
	return files
}
