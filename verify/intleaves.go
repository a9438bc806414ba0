package verify

import (
	"slices"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/ctarget"
)

// intLeafTolerance is the tolerance of a build with integer leaves: not
// exact, within the largest of the bounds ctarget derives per output. A
// model ctarget refuses integer leaves for gets the exact tolerance; its
// Emit fails and says why.
func intLeafTolerance(p *compile.Program, o ctarget.Options) (bool, float64) {
	bounds, _, err := ctarget.IntLeafBounds(p, o)
	if err != nil || len(bounds) == 0 {
		return true, 0
	}
	return false, slices.Max(bounds)
}
