package udf

import (
	"database/sql"
	"fmt"
	"math"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// registerTrees registers copse_trees.
func (h *Host) registerTrees(conn *sql.Conn) error {
	return duck.RegisterTable(conn, duck.TableFunc{Name: "copse_trees", Args: []duck.Type{duck.Varchar},
		Named: []duck.Param{{Name: "tree", Type: duck.Double}}, Bind: h.bindTrees})
}

// treesColumns are copse_trees' columns.
var treesColumns = []duck.Column{
	{Name: "tree", Type: duck.BigInt}, {Name: "node", Type: duck.BigInt}, {Name: "depth", Type: duck.BigInt},
	{Name: "feature", Type: duck.Varchar}, {Name: "threshold", Type: duck.Double}, {Name: "levels", Type: duck.VarcharList},
	{Name: "missing_goes", Type: duck.Varchar}, {Name: "left", Type: duck.BigInt}, {Name: "right", Type: duck.BigInt},
	{Name: "rows", Type: duck.Double}, {Name: "class", Type: duck.Varchar}, {Name: "value", Type: duck.Double},
	{Name: "gain", Type: duck.Double},
}

// treesNode names one node of one tree.
type treesNode struct {
	tree, node, depth int32
}

// bindTrees: copse_trees(model, tree := n) → one row per node of every tree (or of tree
// n), trees in model order, nodes in stored order (a parent before its children):
//
//	tree          1, 2, … (a boosted model's trees round by round; multinomial: K per round)
//	node          0 is the root; children sit side by side (right = left + 1)
//	depth         0 at the root
//	feature       the split's feature; NULL at leaves
//	threshold     numeric splits: values ≤ threshold go left; NULL otherwise
//	levels        categorical splits: the levels that go left; NULL otherwise
//	missing_goes  'left' or 'right': where missing values (and levels not in training) go
//	left, right   the children's node numbers; NULL at leaves
//	rows          the training weight that reached the node (its cover; rows when unweighted)
//	class, value  classification trees: the node's most probable class and its share of
//	              the node's training weight (AdaBoost: as the tree's own leaf); boosted
//	              trees: the raw score the node adds (leaves) and the class whose score it
//	              adds to (the positive class for logistic loss, NULL for values);
//	              regression trees: the node's mean (class NULL)
//	gain          the split's weighted impurity decrease; NULL at leaves
func (h *Host) bindTrees(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_trees"
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	if len(m.Trees) == 0 {
		see := "copse_coefficients"
		if m.Blend != nil {
			see = "copse_members"
		}
		return nil, fmt.Errorf("%s: model %q (version %d), method %s, has no trees of its own; see %s('%s')",
			fn, e.Name, e.Version, m.Method, see, sqlEscape(e.Name))
	}
	lo, hi := 0, len(m.Trees)
	if v, ok := call.Named["tree"].(float64); ok {
		if v != math.Trunc(v) || v < 1 || v > float64(len(m.Trees)) {
			return nil, fmt.Errorf("%s: %w: tree := %v: model %q (version %d) has trees 1 to %d", fn, ErrCall, v, e.Name, e.Version, len(m.Trees))
		}
		lo, hi = int(v)-1, int(v)
	}
	boostK := 0
	if m.Boost != nil {
		boostK = len(m.Boost.InitScore)
	}
	return &duck.TableBinding{
		Columns: treesColumns,
		Init: func() (duck.FillFunc, error) {
			var nodes []treesNode
			for ti := lo; ti < hi; ti++ {
				t := m.Trees[ti]
				depth := make([]int32, len(t.Nodes))
				for i := range t.Nodes {
					n := &t.Nodes[i]
					if n.Left >= 0 {
						depth[n.Left], depth[n.Left+1] = depth[i]+1, depth[i]+1
					}
					nodes = append(nodes, treesNode{int32(ti), int32(i), depth[i]})
				}
			}
			return rowsFill(len(nodes), func(out *duck.Chunk, j, r int) {
				tn := nodes[r]
				t := m.Trees[tn.tree]
				n := &t.Nodes[tn.node]
				out.SetInt64(0, j, int64(tn.tree)+1)
				out.SetInt64(1, j, int64(tn.node))
				out.SetInt64(2, j, int64(tn.depth))
				if n.IsLeaf() {
					for c := 3; c <= 8; c++ {
						out.SetNull(c, j)
					}
					out.SetNull(12, j)
				} else {
					fi := &m.Features[n.Feature]
					out.SetString(3, j, fi.Name)
					if n.LevelSet >= 0 {
						out.SetNull(4, j)
						out.SetStrings(5, j, splitLeftLevels(t, n, fi))
					} else {
						setFloat(out, 4, j, n.Threshold)
						out.SetNull(5, j)
					}
					if n.DefaultLeft {
						out.SetString(6, j, "left")
					} else {
						out.SetString(6, j, "right")
					}
					out.SetInt64(7, j, int64(n.Left))
					out.SetInt64(8, j, int64(n.Left)+1)
					setFloat(out, 12, j, t.Gain[tn.node])
				}
				setFloat(out, 9, j, t.Cover[tn.node])
				v := t.NodeValue(int(tn.node))
				switch {
				case boostK > 1:
					out.SetString(10, j, m.Classes[int(tn.tree)%boostK])
					setFloat(out, 11, j, v[0])
				case boostK == 1 && m.Task == forest.Classification:
					out.SetString(10, j, m.Classes[1])
					setFloat(out, 11, j, v[0])
				case m.Task == forest.Classification && boostK == 0:
					k := forest.Class(v)
					out.SetString(10, j, m.Classes[k])
					setFloat(out, 11, j, v[k])
				default:
					out.SetNull(10, j)
					setFloat(out, 11, j, v[0])
				}
			}), nil
		},
	}, nil
}

// splitLeftLevels lists the levels a categorical split sends left, in level order: those
// whose bit is set, and those past the bit set when missing values go left.
func splitLeftLevels(t *forest.Tree, n *forest.Node, fi *forest.FeatureInfo) []string {
	bits := t.LevelSets[n.LevelSet]
	out := []string{}
	for c, l := range fi.Levels {
		left := n.DefaultLeft
		if c < len(bits)*64 {
			left = bits[c>>6]&(1<<(uint(c)&63)) != 0
		}
		if left {
			out = append(out, l)
		}
	}
	return out
}
