package compile

// markUsed marks exactly the features that some split tests.
func markUsed(p *Program) {
	for i := range p.Features {
		p.Features[i].Used = false
	}
	for ti := range p.Trees {
		for _, n := range p.Trees[ti].Nodes {
			if !n.IsLeaf() {
				p.Features[n.Feature].Used = true
			}
		}
	}
}
