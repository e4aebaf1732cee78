package forest

import (
	"math"
	"math/rand/v2"
	"sync/atomic"
)

// Importance holds per-feature importances, in model feature order.
type Importance struct {
	// Impurity is the mean decrease in impurity: each tree's split gains per feature as a
	// share of that tree's total, averaged over trees, normalised to sum to 1. AdaBoost
	// weighs each tree's shares by its vote α, as its predictions do.
	Impurity []float64
	// Permutation is the mean increase in a tree's out-of-bag loss (error rate, or MSE for
	// regression) when the feature's values are shuffled among that tree's out-of-bag rows
	// (Breiman 2001); PermutationStd is its standard deviation across trees. Nil when not
	// computed.
	Permutation    []float64
	PermutationStd []float64
}

// ImportanceKind names an importance measure.
type ImportanceKind string

// The importance measures.
const (
	ImpurityImportance    ImportanceKind = "impurity"
	PermutationImportance ImportanceKind = "permutation"
)

func impurityImportance(m *Model) []float64 {
	imp := make([]float64, len(m.Features))
	per := make([]float64, len(m.Features))
	for ti, t := range m.Trees {
		// AdaBoost weighs each tree's shares by its vote α (the trees vote with it).
		tw := 1.0
		if m.AdaBoost != nil {
			tw = m.AdaBoost.Alpha[ti]
		}
		clear(per)
		total := 0.0
		for i, n := range t.Nodes {
			if n.Left >= 0 {
				per[n.Feature] += t.Gain[i]
				total += t.Gain[i]
			}
		}
		if total > 0 {
			for f := range per {
				imp[f] += tw * per[f] / total
			}
		}
	}
	sum := 0.0
	for _, v := range imp {
		sum += v
	}
	if sum > 0 {
		for f := range imp {
			imp[f] /= sum
		}
	}
	return imp
}

// permutationImportance computes Breiman's permutation importance tree by tree on up to
// p.PermutationRows out-of-bag rows of each tree. Trees are independent and each has
// its own random stream, so the result does not depend on threads.
func permutationImportance(m *Model, d *Dataset, inbag [][]uint64, p Params, threads int, stop *atomic.Bool) (mean, sd []float64, err error) {
	F, B := len(m.Features), len(m.Trees)
	delta := make([]float64, B*F) // loss increase of tree b when feature f is shuffled
	parallelFor(B, threads, func(b int) {
		if stop.Load() {
			return
		}
		t := m.Trees[b]
		rng := rand.New(rand.NewPCG(treeSeed(p.Seed, b, streamPermutation), uint64(b)))
		var oob []int
		for i := range d.rows {
			if !inBag(inbag[b], i) && d.weight(i) > 0 {
				oob = append(oob, i)
			}
		}
		if len(oob) == 0 {
			return
		}
		if p.PermutationRows > 0 && len(oob) > p.PermutationRows {
			for j := range p.PermutationRows {
				k := j + rng.IntN(len(oob)-j)
				oob[j], oob[k] = oob[k], oob[j]
			}
			oob = oob[:p.PermutationRows]
		}
		n := len(oob)
		rows := make([]float64, n*F)
		for j, i := range oob {
			rowOf(d, i, rows[j*F:(j+1)*F])
		}
		leaves := make([]int32, n)
		base := treeLoss(m, t, d, oob, rows, F, leaves)
		used := make([]bool, F)
		for _, nd := range t.Nodes {
			if nd.Left >= 0 {
				used[nd.Feature] = true
			}
		}
		saved := make([]float64, n)
		for f := range F {
			if !used[f] {
				continue // shuffling an unused feature changes nothing
			}
			for j := range n {
				saved[j] = rows[j*F+f]
			}
			for j := n - 1; j > 0; j-- {
				k := rng.IntN(j + 1)
				rows[j*F+f], rows[k*F+f] = rows[k*F+f], rows[j*F+f]
			}
			delta[b*F+f] = treeLoss(m, t, d, oob, rows, F, leaves) - base
			for j := range n {
				rows[j*F+f] = saved[j]
			}
		}
	})
	if stop.Load() {
		return nil, nil, errStopped
	}
	mean, sd = make([]float64, F), make([]float64, F)
	for f := range F {
		for b := range B {
			mean[f] += delta[b*F+f]
		}
		mean[f] /= float64(B)
		if B > 1 {
			for b := range B {
				e := delta[b*F+f] - mean[f]
				sd[f] += e * e
			}
			sd[f] = math.Sqrt(sd[f] / float64(B-1))
		}
	}
	return mean, sd, nil
}

// treeLoss is one tree's weighted loss on rows: error rate, or mean squared error.
// leaves is scratch of len(idx).
func treeLoss(m *Model, t *Tree, d *Dataset, idx []int, rows []float64, F int, leaves []int32) float64 {
	t.LeafBatch(rows, F, leaves)
	var loss, sw float64
	for j, i := range idx {
		v := t.NodeValue(int(leaves[j]))
		w := d.weight(i)
		if m.Task == Classification {
			if Class(v) != int(d.target.codes[i]) {
				loss += w
			}
		} else {
			e := v[0] - d.target.num[i]
			loss += w * e * e
		}
		sw += w
	}
	return loss / sw
}
