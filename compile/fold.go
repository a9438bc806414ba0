package compile

import (
	"encoding/binary"
	"math"
)

// fold replaces a split whose two subtrees are identical by its left subtree.
// Identical means the same shape, features, comparisons, missing routing
// (zero_missing included), categories of set splits, and bit-identical
// thresholds and leaf values, so whichever way a row goes,
// it reaches an equal leaf: exact. Subtrees are numbered bottom-up by their
// content (hash-consing), so a split that folds counts as its child for its
// ancestors, and chains of folds collapse in one pass.
func fold(p *Program) {
	for ti := range p.Trees {
		foldTree(p.Trees[ti].Nodes)
	}
	sweep(p)
}

func foldTree(nodes []Node) {
	canon := make([]int32, len(nodes))
	ids := map[string]int32{}
	var key []byte
	// Preorder puts children after parents, so a backward scan sees every
	// child before its parent.
	for i := len(nodes) - 1; i >= 0; i-- {
		n := &nodes[i]
		key = key[:0]
		if n.IsLeaf() {
			key = append(key, 'L')
			for _, v := range n.Value {
				key = binary.LittleEndian.AppendUint64(key, math.Float64bits(v))
			}
		} else {
			l, r := canon[n.Left], canon[n.Right]
			if l == r {
				n.decided = goLeft
				canon[i] = l
				continue
			}
			key = append(key, 'S', byte(n.Op))
			flags := byte(0)
			if n.MissingLeft {
				flags |= 1
			}
			if n.ZeroMissing {
				flags |= 2
			}
			if n.IsSetSplit() {
				flags |= 4
			}
			key = append(key, flags)
			key = binary.LittleEndian.AppendUint32(key, uint32(len(n.Categories)))
			for _, c := range n.Categories {
				key = binary.LittleEndian.AppendUint32(key, uint32(c))
			}
			key = binary.LittleEndian.AppendUint64(key, uint64(n.Feature))
			key = binary.LittleEndian.AppendUint64(key, math.Float64bits(n.Threshold))
			key = binary.LittleEndian.AppendUint32(key, uint32(l))
			key = binary.LittleEndian.AppendUint32(key, uint32(r))
		}
		id, ok := ids[string(key)]
		if !ok {
			id = int32(len(ids))
			ids[string(key)] = id
		}
		canon[i] = id
	}
}
