package forest

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
)

// Gradient boosting (Friedman 2001) with second-order leaf values. Each round computes,
// per training row, the loss's gradient g and hessian h at the current raw score F, and
// grows one regression tree on rows weighted w·h with target −g/h. Its histograms then
// hold (H, S, N) = (Σwh, −Σwg, Σw) per bin, so the score S²/(H+λ) is the second-order
// gain and the leaf value S/(H+λ) is the Newton step, while MinLeaf bounds the row
// weight N; the step is shrunk by the learning rate and added to F for every row. Rounds
// run one after another; per-row work, fixed blocks of sums and the histograms of large
// nodes (split by feature) are spread over threads, so the model does not depend on
// Params.Threads.

// hessianFloor keeps −g/h finite when a logistic probability saturates (h = p(1−p)
// rounds to 0): such rows keep a target of bounded size and almost no weight.
const hessianFloor = 1e-16

// probClip keeps the initial log-odds finite when the training rows hold one class only.
const probClip = 1e-15

// Stream tag of the holdout draw; row and permutation draws use 1 and 2.
const streamHoldout = 3

// boostBlock is how many rows one parallel step of the score update takes.
const boostBlock = 4096

// boostRun is one boosting run's state; set.yreg is rewritten with the Newton targets
// before every round.
type boostRun struct {
	fr      *fitRun
	loss    Loss
	y       []float64 // target: value, or 1 for the second class and 0 for the first
	x       []float64 // rows in model coding, row-major, for the score update (or nil)
	score   []float64 // raw score F of every row
	hw      []float64 // w·h of every training row, refreshed each round
	train   []int32   // training rows (positive weight, not held out), increasing
	holdout []int32   // held-out rows (positive weight), increasing
	threads int
}

// boost trains the rounds and returns the kept trees and the boosting record.
func (fr *fitRun) boost(loss Loss, threads int) ([]*Tree, *Boost, error) {
	d, p := fr.d, fr.p
	n := d.rows
	br := &boostRun{fr: fr, loss: loss, y: make([]float64, n), score: make([]float64, n),
		hw: make([]float64, n), threads: threads}
	if loss == LossLogistic {
		for i, c := range d.target.codes {
			if c == 1 {
				br.y[i] = 1
			}
		}
	} else {
		copy(br.y, d.target.num)
	}
	br.split(p)
	if len(br.train) == 0 {
		return nil, nil, errors.New("forest: boosting: no training rows with positive weight are left beside the holdout")
	}
	if p.HoldoutFraction > 0 && len(br.holdout) == 0 {
		return nil, nil, fmt.Errorf("forest: holdout_fraction %g: no rows with positive weight were held out", p.HoldoutFraction)
	}
	init := br.initScore()
	for i := range br.score {
		br.score[i] = init
	}
	if len(br.holdout) > 0 || p.RowFraction < 1 {
		// Rows outside a round's sample walk the tree over their values, kept here in
		// model coding; without such rows the copy is not needed.
		F := len(d.features)
		br.x = make([]float64, n*F)
		parallelFor((n+boostBlock-1)/boostBlock, threads, func(k int) {
			for i := k * boostBlock; i < min(n, (k+1)*boostBlock); i++ {
				rowOf(d, i, br.x[i*F:(i+1)*F])
			}
		})
	}

	b := &Boost{Loss: loss, InitScore: []float64{init}}
	var trees []*Tree
	cfg := fr.cfg
	cfg.threads = threads
	g := newGrower(fr.set, cfg, fr.stop)
	best, bestLoss := 0, math.Inf(1)
	rows := make([]int32, 0, len(br.train))
	wts := make([]float64, 0, len(br.train))
	var pick []bool
	for r := range p.Trees {
		if fr.stop.Load() {
			return nil, nil, errStopped
		}
		br.gradients()
		rng := rand.New(rand.NewPCG(treeSeed(p.Seed, r, streamRows), uint64(r)))
		rows, wts = rows[:0], wts[:0]
		if p.RowFraction < 1 {
			pick = br.subsample(p.RowFraction, rng, pick)
		}
		for k, i := range br.train {
			if pick == nil || pick[k] {
				rows = append(rows, i)
				wts = append(wts, br.hw[i])
			}
		}
		t, err := g.grow(rows, wts, rng)
		if err != nil {
			return nil, nil, err
		}
		for k := range t.Value {
			t.Value[k] *= p.LearningRate
		}
		br.update(t, g, pick)
		trees = append(trees, t)
		b.Rounds++
		b.TrainLoss = append(b.TrainLoss, br.meanLoss(br.train))
		if br.holdout != nil {
			hl := br.meanLoss(br.holdout)
			b.HoldoutLoss = append(b.HoldoutLoss, hl)
			if hl < bestLoss {
				best, bestLoss = r, hl
			}
		} else {
			best = r
		}
		if p.Progress != nil {
			p.Progress(r+1, p.Trees)
		}
		if r-best >= p.Patience {
			break
		}
	}
	b.BestRound = best + 1
	clear(trees[b.BestRound:]) // let the rounds past the best go
	return trees[:b.BestRound:b.BestRound], b, nil
}

// split draws the holdout: a seeded share of the rows with positive weight, drawn per
// class for classification so that both sides keep the class mix.
func (br *boostRun) split(p Params) {
	d := br.fr.d
	groups := 1
	if br.loss == LossLogistic {
		groups = 2
	}
	hold := make([]bool, d.rows)
	if p.HoldoutFraction > 0 {
		rng := rand.New(rand.NewPCG(treeSeed(p.Seed, 0, streamHoldout), 0))
		for c := range groups {
			var idx []int32
			for i := range d.rows {
				if d.weight(i) > 0 && (groups == 1 || int(br.y[i]) == c) {
					idx = append(idx, int32(i))
				}
			}
			k := int(math.Round(p.HoldoutFraction * float64(len(idx))))
			for j := range k {
				s := j + rng.IntN(len(idx)-j)
				idx[j], idx[s] = idx[s], idx[j]
				hold[idx[j]] = true
			}
		}
	}
	for i := range d.rows {
		switch {
		case d.weight(i) <= 0:
		case hold[i]:
			br.holdout = append(br.holdout, int32(i))
		default:
			br.train = append(br.train, int32(i))
		}
	}
}

// initScore is the constant raw score that minimises the loss on the training rows.
func (br *boostRun) initScore() float64 {
	d := br.fr.d
	sw, swy := 0.0, 0.0
	for _, i := range br.train {
		w := d.weight(int(i))
		sw += w
		swy += w * br.y[i]
	}
	mean := swy / sw
	if br.loss == LossLogistic {
		q := min(max(mean, probClip), 1-probClip)
		return math.Log(q / (1 - q))
	}
	return mean
}

// gradients writes each training row's Newton target −g/h into the grower's target and
// its weight w·h into hw.
func (br *boostRun) gradients() {
	d, yreg := br.fr.d, br.fr.set.yreg
	n := len(br.train)
	parallelFor((n+boostBlock-1)/boostBlock, br.threads, func(k int) {
		for _, i := range br.train[k*boostBlock : min(n, (k+1)*boostBlock)] {
			f, y := br.score[i], br.y[i]
			if br.loss == LossLogistic {
				pr := logisticLink(f)
				h := max(pr*(1-pr), hessianFloor)
				yreg[i] = (y - pr) / h
				br.hw[i] = d.weight(int(i)) * h
				continue
			}
			yreg[i] = y - f
			br.hw[i] = d.weight(int(i))
		}
	})
}

// subsample marks round's share of the training rows, drawn without replacement
// (stochastic gradient boosting, Friedman 2002).
func (br *boostRun) subsample(frac float64, rng *rand.Rand, pick []bool) []bool {
	n := len(br.train)
	if pick == nil {
		pick = make([]bool, n)
	}
	clear(pick)
	m := max(1, int(math.Round(frac*float64(n))))
	perm := make([]int32, n)
	for i := range perm {
		perm[i] = int32(i)
	}
	for j := range m {
		k := j + rng.IntN(n-j)
		perm[j], perm[k] = perm[k], perm[j]
		pick[perm[j]] = true
	}
	return pick
}

// update adds tree t's (shrunk) values to the score of every row. The rows the tree
// grew on take their leaf from the grower's partition (their bins lead to the same leaf
// as their values); the others (held out, or not drawn this round) walk the tree over
// their values as prediction does.
func (br *boostRun) update(t *Tree, g *grower, pick []bool) {
	for _, lr := range g.leafRows {
		v := t.Value[lr.node]
		for _, r := range g.rows[lr.start:lr.end] {
			br.score[r] += v
		}
	}
	var rest []int32
	if pick != nil {
		for k, i := range br.train {
			if !pick[k] {
				rest = append(rest, i)
			}
		}
	}
	rest = append(rest, br.holdout...)
	n, F := len(rest), len(br.fr.d.features)
	parallelFor((n+boostBlock-1)/boostBlock, br.threads, func(k int) {
		lo, hi := k*boostBlock, min(n, (k+1)*boostBlock)
		block := make([]float64, (hi-lo)*F)
		for j, r := range rest[lo:hi] {
			copy(block[j*F:(j+1)*F], br.x[int(r)*F:int(r+1)*F])
		}
		leaves := make([]int32, hi-lo)
		t.LeafBatch(block, F, leaves)
		for j, leaf := range leaves {
			br.score[rest[lo+j]] += t.Value[leaf]
		}
	})
}

// meanLoss is the weighted mean loss over rows: squared error, or log loss. Blocks of
// rows are summed in parallel and their sums added in block order, so the result does
// not depend on the number of threads.
func (br *boostRun) meanLoss(rows []int32) float64 {
	d := br.fr.d
	n := len(rows)
	blocks := (n + boostBlock - 1) / boostBlock
	sums := make([]float64, 2*blocks)
	parallelFor(blocks, br.threads, func(k int) {
		sw, sl := 0.0, 0.0
		for _, i := range rows[k*boostBlock : min(n, (k+1)*boostBlock)] {
			w := d.weight(int(i))
			f, y := br.score[i], br.y[i]
			var l float64
			if br.loss == LossLogistic {
				// log(1 + e^F) − yF, written to stay finite for large |F|.
				l = max(f, 0) + math.Log1p(math.Exp(-math.Abs(f))) - y*f
			} else {
				l = (y - f) * (y - f)
			}
			sw += w
			sl += w * l
		}
		sums[2*k], sums[2*k+1] = sw, sl
	})
	sw, sl := 0.0, 0.0
	for k := range blocks {
		sw += sums[2*k]
		sl += sums[2*k+1]
	}
	return sl / sw
}

// boostLoss resolves the loss for a task and checks it fits the target.
func boostLoss(p Params, task Task, classes int) (Loss, error) {
	loss := p.Loss
	if loss == "" {
		loss = LossSquared
		if task == Classification {
			loss = LossLogistic
		}
	}
	switch {
	case task == Regression && loss != LossSquared:
		return "", fmt.Errorf("forest: loss %q: regression takes %q", loss, LossSquared)
	case task == Classification && loss != LossLogistic:
		return "", fmt.Errorf("forest: loss %q: classification takes %q", loss, LossLogistic)
	case loss == LossLogistic && classes != 2:
		return "", fmt.Errorf("forest: loss %q: the target has %d classes, want 2", loss, classes)
	}
	return loss, nil
}
