package compile

import "github.com/sawmill-dev/sawmill/forest"

// lowerVote turns a vote model into an average of one-hot vectors: each leaf
// becomes 1 at the argmax of its vector (ties to the lowest index) and 0
// elsewhere. Summing those from zero in tree order counts the same votes the
// interpreter counts, and both then divide by the number of trees and add
// the base score, so the outputs are bit-identical. Emitters only ever sum.
func lowerVote(p *Program) {
	if p.Combine != forest.Vote {
		return
	}
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			n := &p.Trees[ti].Nodes[i]
			if !n.IsLeaf() {
				continue
			}
			w := forest.Argmax(n.Value)
			for j := range n.Value {
				n.Value[j] = 0
			}
			n.Value[w] = 1
		}
	}
	p.Combine = forest.Average
}
