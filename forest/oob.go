package forest

import (
	"math"
	"sync/atomic"
)

// OOB holds out-of-bag results: each training row scored only by the trees that did not
// draw it (Breiman 1996, 2001), which estimates the error on new data without a holdout.
type OOB struct {
	// Votes is, per training row, how many trees left it out of their sample.
	Votes []int32
	// Value holds Width numbers per row: mean class probabilities or the mean value over
	// the trees that voted; NaN where no tree voted.
	Value []float64
	// Metrics are computed over the rows with at least one vote, weighted by row weight;
	// the first is the headline metric.
	Metrics []Metric
	// Curve[b] is CurveMetric over the trees 0…b, so its last value equals that metric in
	// Metrics.
	Curve       []float64
	CurveMetric string
	// Scored is the number of rows with at least one vote.
	Scored int
}

// Metric is a named number.
type Metric struct {
	Name  string
	Value float64
}

// oobChunkRows is the row block of the out-of-bag pass. Blocks are fixed (not per
// worker), and their partial sums are merged in block order, so the result does not
// depend on the number of threads.
const oobChunkRows = 4096

// outOfBag scores every row with the trees that did not draw it, tree by tree over blocks
// of rows, and builds the curve of the headline metric as trees are added.
func outOfBag(m *Model, d *Dataset, inbag [][]uint64, threads int, stop *atomic.Bool) (*OOB, error) {
	n, p, W, B := d.rows, len(d.features), m.Width(), len(m.Trees)
	o := &OOB{Votes: make([]int32, n), Value: make([]float64, n*W)}
	chunks := (n + oobChunkRows - 1) / oobChunkRows
	// Per chunk and tree: weighted loss sum and weight of the rows scored so far.
	loss := make([]float64, chunks*B)
	wsum := make([]float64, chunks*B)
	classify := m.Task == Classification
	parallelFor(chunks, threads, func(c int) {
		if stop.Load() {
			return
		}
		lo, hi := c*oobChunkRows, min(n, (c+1)*oobChunkRows)
		rows := make([]float64, (hi-lo)*p)
		for i := lo; i < hi; i++ {
			rowOf(d, i, rows[(i-lo)*p:(i-lo+1)*p])
		}
		// The tree's out-of-bag rows of this block, gathered so LeafBatch can walk them
		// side by side.
		picked := make([]int, 0, hi-lo)
		block := make([]float64, 0, len(rows))
		leaves := make([]int32, hi-lo)
		for b, t := range m.Trees {
			bag := inbag[b]
			picked, block = picked[:0], block[:0]
			for i := lo; i < hi; i++ {
				if !inBag(bag, i) && d.weight(i) > 0 {
					picked = append(picked, i)
					block = append(block, rows[(i-lo)*p:(i-lo+1)*p]...)
				}
			}
			t.LeafBatch(block, p, leaves[:len(picked)])
			for j, i := range picked {
				v := t.NodeValue(int(leaves[j]))
				acc := o.Value[i*W : (i+1)*W]
				for k := range acc {
					acc[k] += v[k]
				}
				o.Votes[i]++
			}
			// The curve: loss of the running means after tree b.
			var l, w float64
			for i := lo; i < hi; i++ {
				if o.Votes[i] == 0 {
					continue
				}
				wi := d.weight(i)
				acc := o.Value[i*W : (i+1)*W]
				if classify {
					if Class(acc) != int(d.target.codes[i]) {
						l += wi
					}
				} else {
					e := acc[0]/float64(o.Votes[i]) - d.target.num[i]
					l += wi * e * e
				}
				w += wi
			}
			loss[c*B+b], wsum[c*B+b] = l, w
		}
	})
	if stop.Load() {
		return nil, errStopped
	}
	o.Curve = make([]float64, B)
	for b := range B {
		var l, w float64
		for c := range chunks {
			l += loss[c*B+b]
			w += wsum[c*B+b]
		}
		o.Curve[b] = math.NaN()
		if w > 0 {
			o.Curve[b] = l / w
		}
	}
	for i := range n {
		acc := o.Value[i*W : (i+1)*W]
		if o.Votes[i] == 0 {
			for k := range acc {
				acc[k] = math.NaN()
			}
			continue
		}
		o.Scored++
		inv := 1 / float64(o.Votes[i])
		for k := range acc {
			acc[k] *= inv
		}
	}
	// Score only the rows that got a vote.
	var idx []int
	for i := range n {
		if o.Votes[i] > 0 && d.weight(i) > 0 {
			idx = append(idx, i)
		}
	}
	weights := make([]float64, len(idx))
	for j, i := range idx {
		weights[j] = d.weight(i)
	}
	if classify {
		o.CurveMetric = "error"
		actual := make([]int32, len(idx))
		probs := make([]float64, len(idx)*W)
		for j, i := range idx {
			actual[j] = d.target.codes[i]
			copy(probs[j*W:(j+1)*W], o.Value[i*W:(i+1)*W])
		}
		o.Metrics = ClassificationMetrics(actual, probs, W, weights)
	} else {
		o.CurveMetric = "mse"
		actual := make([]float64, len(idx))
		pred := make([]float64, len(idx))
		for j, i := range idx {
			actual[j], pred[j] = d.target.num[i], o.Value[i]
		}
		o.Metrics = RegressionMetrics(actual, pred, weights)
	}
	return o, nil
}
