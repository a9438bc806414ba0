package golang

import (
	"github.com/dave/jennifer/jen"
	"sawmill/compile"
)

func (g *gen) branchless() []jen.Code            { return nil }
func (g *gen) branchlessPredictBody() []jen.Code { return nil }
func useBranchless(p *compile.Program) bool      { return false }
