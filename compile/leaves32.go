package compile

import "math"

// roundLeaves32 rounds every leaf value to the nearest float32. It is lossy:
// it halves what a float table needs and changes outputs by up to half a
// float32 ulp per leaf, which verify then measures. Values beyond float32's
// range are left as they are.
func roundLeaves32(p *Program) {
	for ti := range p.Trees {
		for i := range p.Trees[ti].Nodes {
			for j, v := range p.Trees[ti].Nodes[i].Value {
				if math.Abs(v) <= math.MaxFloat32 {
					p.Trees[ti].Nodes[i].Value[j] = float64(float32(v))
				}
			}
		}
	}
}
