package forest

import (
	"fmt"
	"math"
	"sync"
	"sync/atomic"
)

// FeatureInfo describes one input of a model.
type FeatureInfo struct {
	Name    string
	Kind    Kind
	Levels  []string // Categorical: level names, indexed by code
	Binning Binning  // the training distribution over bins
}

// Model is a fitted ensemble. It is read-only after Train or Decode, so any number of
// goroutines may predict with it at once.
type Model struct {
	Method   Method
	Task     Task
	Target   string
	Classes  []string // Classification: class names; with two, Classes[1] is positive
	Features []FeatureInfo
	Params   Params // as trained, with Threads and Progress cleared
	Rows     int    // training rows
	Trees    []*Tree

	OOB        *OOB // nil for MethodTree, MethodBoosting and MethodAdaBoost
	Importance Importance
	// Boost is set on boosted models: they sum their trees and add an initial score
	// instead of averaging.
	Boost *Boost
	// AdaBoost is set on AdaBoost models: their trees vote with weights.
	AdaBoost *AdaBoost
	// Linear is set on linear models (MethodLinear), which have no trees.
	Linear *Linear
	// Blend is set on blends (MethodBlend), which have no trees of their own.
	Blend *Blend
}

// Boost is what a boosted model adds: how its raw score starts and becomes a prediction,
// and the training curve.
type Boost struct {
	Loss Loss
	// InitScore is the raw score before any tree: the weighted mean target (squared),
	// median (absolute, huber) or quantile (quantile), the log of the mean (poisson),
	// the log-odds of the weighted positive rate (logistic), or the log of each class's
	// weighted share (multinomial: one per class; tree t adds to class t mod K).
	InitScore []float64
	// Rounds is how many rounds were trained; BestRound how many were kept (their trees
	// are Model.Trees, K per round for multinomial): all of them without early stopping,
	// else the best holdout round.
	Rounds, BestRound int
	// TrainLoss and HoldoutLoss hold the weighted mean loss after each round: squared
	// error, log loss, absolute error, Huber loss (at the first round's δ), pinball loss
	// or Poisson deviance. HoldoutLoss is nil without a holdout.
	TrainLoss, HoldoutLoss []float64
}

// treeWidth is how many numbers each tree's node holds: one raw score per boosted tree,
// else one per prediction. It follows the method, which decoding reads before the trees.
func (m *Model) treeWidth() int {
	if m.Method == MethodBoosting {
		return 1
	}
	return m.Width()
}

// logisticLink is the logistic link 1/(1+e^−F); it saturates to 0 or 1 without overflow.
func logisticLink(f float64) float64 { return 1 / (1 + math.Exp(-f)) }

// link turns a boosted raw score into dst: the class probabilities [1−p, p]
// (logistic), the mean e^F (poisson), or the value itself.
func (b *Boost) link(raw float64, dst []float64) {
	switch b.Loss {
	case LossLogistic:
		p := logisticLink(raw)
		dst[0], dst[1] = 1-p, p
		return
	case LossPoisson:
		dst[0] = math.Exp(raw)
		return
	}
	dst[0] = raw
}

// Width is how many numbers a prediction holds: one per class, or one value.
func (m *Model) Width() int {
	if m.Task == Classification {
		return len(m.Classes)
	}
	return 1
}

// PredictRow writes the prediction for one row into dst, which must hold Width numbers,
// and returns it: class probabilities averaged over trees, or the mean value; a boosted
// model sums its trees onto the initial score and applies the loss's link; an AdaBoost
// model returns its α-weighted vote shares. A row holds
// one number per feature in model order: categorical features as level codes, NaN (or a
// negative code) for missing values. It does not allocate.
func (m *Model) PredictRow(row, dst []float64) []float64 {
	dst = dst[:m.Width()]
	if m.Blend != nil {
		m.blendRow(row, dst)
		return dst
	}
	if m.Linear != nil {
		m.linearRow(row, dst)
		return dst
	}
	if b := m.Boost; b != nil {
		if K := len(b.InitScore); K > 1 {
			// Multinomial: tree t adds to class t mod K; then the softmax.
			copy(dst, b.InitScore)
			for ti, t := range m.Trees {
				dst[ti%K] += t.Value[t.Leaf(row)]
			}
			softmax(dst)
			return dst
		}
		raw := b.InitScore[0]
		for _, t := range m.Trees {
			raw += t.Value[t.Leaf(row)]
		}
		b.link(raw, dst)
		return dst
	}
	clear(dst)
	if a := m.AdaBoost; a != nil {
		sum := 0.0
		for ti, t := range m.Trees {
			adaVote(t.NodeValue(t.Leaf(row)), a.Alpha[ti], dst)
			sum += a.Alpha[ti]
		}
		for k := range dst {
			dst[k] /= sum
		}
		return dst
	}
	for _, t := range m.Trees {
		v := t.NodeValue(t.Leaf(row))
		for k := range dst {
			dst[k] += v[k]
		}
	}
	inv := 1 / float64(len(m.Trees))
	for k := range dst {
		dst[k] *= inv
	}
	return dst
}

// predictBlockRows is how many rows Predict carries through one tree at a time: enough
// that a tree's nodes are reused across many rows while it is in cache, few enough that
// the block's inputs (rows × features numbers) stay in the core's L2 cache. 512 to 2048
// measured alike on a 20-feature forest; 2048 was best.
const predictBlockRows = 2048

// Predict scores rows given column by column (cols[f][i] is feature f of row i, coded as
// for PredictRow) into out, Width numbers per row, on up to threads goroutines (0: one).
// The result equals PredictRow's, row for row.
func (m *Model) Predict(cols [][]float64, out []float64, threads int) error {
	if len(cols) != len(m.Features) {
		return fmt.Errorf("forest: predict: %d columns, the model has %d features", len(cols), len(m.Features))
	}
	n := 0
	if len(cols) > 0 {
		n = len(cols[0])
	}
	for f, c := range cols {
		if len(c) != n {
			return fmt.Errorf("forest: predict: column %q has %d rows, want %d", m.Features[f].Name, len(c), n)
		}
	}
	W := m.Width()
	if len(out) < n*W {
		return fmt.Errorf("forest: predict: output holds %d numbers, want %d", len(out), n*W)
	}
	blocks := (n + predictBlockRows - 1) / predictBlockRows
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(blocks, max(threads, 1)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			p := len(cols)
			block := make([]float64, predictBlockRows*p)
			leaves := make([]int32, predictBlockRows)
			for {
				b := int(next.Add(1) - 1)
				if b >= blocks {
					return
				}
				lo := b * predictBlockRows
				hi := min(n, lo+predictBlockRows)
				for f, c := range cols {
					for i := lo; i < hi; i++ {
						block[(i-lo)*p+f] = c[i]
					}
				}
				m.PredictBlock(block[:(hi-lo)*p], p, out[lo*W:hi*W], leaves)
			}
		}()
	}
	wg.Wait()
	return nil
}

// PredictBlock scores row-major rows (p numbers each, coded as for PredictRow) into out,
// Width numbers per row, walking the trees one at a time over all rows. leaves is
// scratch of one entry per row. The sums run in the same order as PredictRow's, so the
// results are bit-identical. It does not allocate; hosts that fill their own blocks
// (a SQL executor per chunk) call it directly.
func (m *Model) PredictBlock(rows []float64, p int, out []float64, leaves []int32) {
	W := m.Width()
	n := len(rows) / p
	leaves = leaves[:n]
	if m.Blend != nil {
		// Row by row, the same sums as PredictRow's.
		for i := range n {
			m.blendRow(rows[i*p:(i+1)*p], out[i*W:(i+1)*W])
		}
		return
	}
	if m.Linear != nil {
		// Row by row, the same sums as PredictRow's.
		for i := range n {
			m.linearRow(rows[i*p:(i+1)*p], out[i*W:(i+1)*W])
		}
		return
	}
	if b := m.Boost; b != nil && n > 0 && len(b.InitScore) > 1 {
		// Multinomial: each row's K raw scores gather in its output, tree t adding to
		// class t mod K in tree order as in PredictRow, then pass through the softmax.
		for i := range n {
			copy(out[i*W:(i+1)*W], b.InitScore)
		}
		for ti, t := range m.Trees {
			t.LeafBatch(rows, p, leaves)
			c := ti % W
			for i, leaf := range leaves {
				out[i*W+c] += t.Value[leaf]
			}
		}
		for i := range n {
			softmax(out[i*W : (i+1)*W])
		}
		return
	}
	if b := m.Boost; b != nil && n > 0 {
		// Raw scores gather in the last slot of each row's output, in tree order as in
		// PredictRow, then pass through the link.
		raw := out[W-1 : n*W]
		for i := range n {
			raw[i*W] = b.InitScore[0]
		}
		for _, t := range m.Trees {
			t.LeafBatch(rows, p, leaves)
			for i, leaf := range leaves {
				raw[i*W] += t.Value[leaf]
			}
		}
		for i := range n {
			b.link(raw[i*W], out[i*W:(i+1)*W])
		}
		return
	}
	clear(out)
	if a := m.AdaBoost; a != nil {
		// The same votes in the same tree order as PredictRow.
		sum := 0.0
		for ti, t := range m.Trees {
			t.LeafBatch(rows, p, leaves)
			for i, leaf := range leaves {
				adaVote(t.Value[int(leaf)*W:int(leaf+1)*W], a.Alpha[ti], out[i*W:(i+1)*W])
			}
			sum += a.Alpha[ti]
		}
		for i := range out[:n*W] {
			out[i] /= sum
		}
		return
	}
	for _, t := range m.Trees {
		t.LeafBatch(rows, p, leaves)
		if W == 1 {
			for i, leaf := range leaves {
				out[i] += t.Value[leaf]
			}
			continue
		}
		for i, leaf := range leaves {
			v := t.Value[int(leaf)*W : int(leaf+1)*W]
			o := out[i*W : (i+1)*W]
			for k := range o {
				o[k] += v[k]
			}
		}
	}
	inv := 1 / float64(len(m.Trees))
	for i := range out {
		out[i] *= inv
	}
}

// Class returns the index of the most probable class in a classification prediction
// (the lower index on ties).
func Class(pred []float64) int {
	best := 0
	for k, v := range pred {
		if v > pred[best] {
			best = k
		}
	}
	return best
}

// rowOf fills dst with row i of a data set in model coding.
func rowOf(d *Dataset, i int, dst []float64) {
	for f := range d.features {
		c := &d.features[f]
		if c.kind == Numeric {
			dst[f] = c.num[i]
		} else if code := c.codes[i]; code >= 0 {
			dst[f] = float64(code)
		} else {
			dst[f] = math.NaN()
		}
	}
}
