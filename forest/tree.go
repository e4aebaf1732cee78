package forest

// Node is one node of a tree. Nodes are stored parent before children (child ID > parent
// ID) and the two children of a split sit side by side: the right child is Left+1.
type Node struct {
	// Threshold: on a numeric split, values x ≤ Threshold go left, larger ones right.
	Threshold float64
	// Left is the left child's index, or -1 on a leaf.
	Left int32
	// Feature is the split feature's index.
	Feature int32
	// LevelSet, on a categorical split, indexes Tree.LevelSets; -1 on numeric splits.
	LevelSet int32
	// DefaultLeft sends missing values (and unknown levels) left.
	DefaultLeft bool
}

// IsLeaf reports whether the node is a leaf.
func (n *Node) IsLeaf() bool { return n.Left < 0 }

// Tree is one fitted tree: node structure plus, per node, its gain, cover and value.
type Tree struct {
	Nodes []Node
	// Gain is the weighted impurity decrease of each split (0 on leaves).
	Gain []float64
	// Cover is the training weight that reached each node.
	Cover []float64
	// Value holds Width numbers per node: class probabilities, or a value.
	Value []float64
	Width int
	// LevelSets are bit sets over level codes: a set bit sends that level left. Bits past
	// the feature's levels, up to the end of the last word, follow the default direction;
	// codes beyond the words follow it too.
	LevelSets [][]uint64
}

// Leaf returns the index of the leaf that a row reaches. Categorical values are level
// codes as float64; NaN (or a negative or unknown code) is missing.
func (t *Tree) Leaf(row []float64) int {
	nodes := t.Nodes
	i := int32(0)
	for {
		n := &nodes[i]
		if n.Left < 0 {
			return int(i)
		}
		i = n.Left + t.step(n, row[n.Feature])
	}
}

// step is 0 when x goes to the left child of split node n and 1 when it goes right.
func (t *Tree) step(n *Node, x float64) int32 {
	if n.LevelSet >= 0 {
		if t.levelGoesLeft(n, x) {
			return 0
		}
		return 1
	}
	var r int32
	if x > n.Threshold {
		r = 1
	}
	if x != x && !n.DefaultLeft {
		r = 1
	}
	return r
}

// laneRows is how many rows LeafBatch walks down a tree side by side: their node loads are
// independent, so the processor overlaps their cache misses instead of waiting on each.
const laneRows = 8

// LeafBatch writes into leaves the leaf reached by each of the row-major rows (p numbers
// each); the result equals Leaf row by row.
func (t *Tree) LeafBatch(rows []float64, p int, leaves []int32) {
	nodes := t.Nodes
	n := len(rows) / p
	i := 0
	for ; i+laneRows <= n; i += laneRows {
		var idx [laneRows]int32
		for {
			moved := false
			for l := range laneRows {
				nd := &nodes[idx[l]]
				if nd.Left < 0 {
					continue
				}
				moved = true
				x := rows[(i+l)*p+int(nd.Feature)]
				next := nd.Left
				if nd.LevelSet < 0 {
					if x > nd.Threshold {
						next++
					}
					if x != x && !nd.DefaultLeft {
						next++
					}
				} else if !t.levelGoesLeft(nd, x) {
					next++
				}
				idx[l] = next
			}
			if !moved {
				break
			}
		}
		copy(leaves[i:i+laneRows], idx[:])
	}
	for ; i < n; i++ {
		leaves[i] = int32(t.Leaf(rows[i*p : (i+1)*p]))
	}
}

func (t *Tree) levelGoesLeft(n *Node, x float64) bool {
	bits := t.LevelSets[n.LevelSet]
	if !(x >= 0) || x >= float64(len(bits)*64) || x != float64(int64(x)) {
		return n.DefaultLeft
	}
	c := uint64(x)
	return bits[c>>6]&(1<<(c&63)) != 0
}

// NodeValue returns the Width numbers stored at node i. The slice aliases the tree.
func (t *Tree) NodeValue(i int) []float64 {
	return t.Value[i*t.Width : (i+1)*t.Width]
}

// Depth returns the length of the longest root-to-leaf path.
func (t *Tree) Depth() int {
	depth := make([]int, len(t.Nodes))
	most := 0
	for i := range t.Nodes {
		n := &t.Nodes[i]
		if n.Left >= 0 {
			depth[n.Left] = depth[i] + 1
			depth[n.Left+1] = depth[i] + 1
			most = max(most, depth[i]+1)
		}
	}
	return most
}

// Leaves counts the leaves.
func (t *Tree) Leaves() int {
	n := 0
	for i := range t.Nodes {
		if t.Nodes[i].Left < 0 {
			n++
		}
	}
	return n
}
