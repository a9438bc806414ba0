package compile

import (
	"math/rand/v2"
	"testing"

	"github.com/stretchr/testify/assert"
)

// Leaf rows reach every leaf of random forests (whose leaves are all
// reachable unless an ancestor decides them, which LeafRows then skips), and
// threshold rows exercise both directions of every split.
func TestLeafRowsCoverage(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	for i := 0; i < 100; i++ {
		f := randomForest(rng)
		rows := LeafRows(f, 0)
		c := Cover(f, rows)
		p, _, err := Compile(f, Options{Skip: []string{"fold"}})
		assert.NoError(t, err)
		// After pruning, the leaves left are exactly the reachable ones: each
		// must be hit. With set splits and numbers that count as missing the
		// analysis over-approximates, so some leaves left may be unreachable.
		complete := !f.HasMissingValue
		for _, tr := range f.Trees {
			complete = complete && tr.Categories == nil && tr.ZeroMissing == nil
		}
		if complete {
			assert.Equal(t, p.NumLeaves(), c.LeavesHit, "forest %d", i)
		} else {
			assert.LessOrEqual(t, c.LeavesHit, p.NumLeaves(), "forest %d", i)
		}
		all := append(rows, ThresholdRows(f, 0)...)
		c2 := Cover(f, all)
		assert.GreaterOrEqual(t, c2.BranchesHit, c.BranchesHit)
	}
}
