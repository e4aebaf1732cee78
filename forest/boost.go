package forest

import (
	"cmp"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// Gradient boosting (Friedman 2001) with second-order leaf values. Each round computes,
// per training row, the loss's gradient g and hessian h at the current raw score F, and
// grows one regression tree on rows weighted w·h with target −g/h. Its histograms then
// hold (H, S, N) = (Σwh, −Σwg, Σw) per bin, so the score S²/(H+λ) is the second-order
// gain and the leaf value S/(H+λ) is the Newton step, while MinLeaf bounds the row
// weight N; the step is shrunk by the learning rate and added to F for every row. Rounds
// run one after another; per-row work, fixed blocks of sums and the histograms of large
// nodes (split by feature) are spread over threads, so the model does not depend on
// Params.Threads. Absolute, Huber and quantile loss grow each tree on their (clipped or
// signed) gradient with h = 1, then refit the leaves to a quantile of their residuals
// (Friedman 2001 §4.2–4.4); the multinomial loss grows one tree per class per round.

// hessianFloor keeps −g/h finite when a logistic probability saturates (h = p(1−p)
// rounds to 0): such rows keep a target of bounded size and almost no weight.
const hessianFloor = 1e-16

// probClip keeps the initial log-odds finite when the training rows hold one class only.
const probClip = 1e-15

// poissonMaxScore caps the raw score F inside the Poisson gradient, hessian and loss
// (e^30 ≈ 1e13), so that an extreme row cannot overflow them; no count data comes near.
const poissonMaxScore = 30

// huberAlpha is the quantile of |y − F| that sets the Huber loss's δ each round
// (Friedman 2001 §4.4).
const huberAlpha = 0.9

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
	score   []float64 // raw scores F of every row, K per row (row-major)
	K       int       // raw scores per row: the classes (multinomial), else 1
	mg, mh  []float64 // multinomial: each row's Newton target and w·h per class
	hw      []float64 // w·h of every training row, refreshed each round
	train   []int32   // training rows (positive weight, not held out), increasing
	holdout []int32   // held-out rows (positive weight), increasing
	threads int
	alpha   float64   // quantile level: Params.Quantile (quantile), huberAlpha (huber)
	delta   float64   // Huber δ of the current round
	delta0  float64   // Huber δ of the first round: the loss curve's, so rounds compare
	sums    []float64 // per-block (weight, loss) sums of the gradient pass
	ylogy   []float64 // Poisson: y·log y of every row (0 at y = 0), for the deviance
}

// boost trains the rounds and returns the kept trees and the boosting record.
func (fr *fitRun) boost(loss Loss, threads int) ([]*Tree, *Boost, error) {
	d, p := fr.d, fr.p
	n := d.rows
	K := 1
	if loss == LossMultinomial {
		K = len(d.target.levels)
	}
	br := &boostRun{fr: fr, loss: loss, y: make([]float64, n), score: make([]float64, n*K),
		hw: make([]float64, n), threads: threads, K: K}
	if loss == LossLogistic || loss == LossMultinomial {
		for i, c := range d.target.codes {
			br.y[i] = float64(c) // 1 for the second class of two
		}
	} else {
		copy(br.y, d.target.num)
	}
	switch loss {
	case LossQuantile:
		br.alpha = p.Quantile
	case LossHuber:
		br.alpha = huberAlpha
	case LossPoisson:
		pos := false
		for i, y := range br.y {
			if y < 0 && d.weight(i) > 0 {
				return nil, nil, fmt.Errorf("forest: loss %q: target %q row %d is %g; want counts ≥ 0", loss, d.target.name, i, y)
			}
			pos = pos || (y > 0 && d.weight(i) > 0)
		}
		if !pos {
			return nil, nil, fmt.Errorf("forest: loss %q: target %q has no value above 0", loss, d.target.name)
		}
		br.ylogy = make([]float64, n)
		for i, y := range br.y {
			if y > 0 {
				br.ylogy[i] = y * math.Log(y)
			}
		}
	}
	if loss == LossLogistic || loss == LossMultinomial || loss == LossPoisson {
		fr.set.minHessian = minHessian
	}
	br.split(p)
	if len(br.train) == 0 {
		return nil, nil, errors.New("forest: boosting: no training rows with positive weight are left beside the holdout")
	}
	if p.HoldoutFraction > 0 && len(br.holdout) == 0 {
		return nil, nil, fmt.Errorf("forest: holdout_fraction %g: no rows with positive weight were held out", p.HoldoutFraction)
	}
	if d.holdout != nil && len(br.holdout) == 0 {
		return nil, nil, errors.New("forest: holdout rows: none of the marked rows has positive weight")
	}
	init := []float64{0}
	if K > 1 {
		init = br.classPriors()
		br.mg, br.mh = make([]float64, n*K), make([]float64, n*K)
	} else {
		init[0] = br.initScore()
	}
	for i := range br.score {
		br.score[i] = init[i%K]
	}
	if e := d.exposure.num; e != nil {
		// The offset log(exposure) (McCullagh & Nelder 1989, §6.2.3) rides in the raw
		// score, so gradients, trees and losses see the mean count e·exp(F).
		for i := range br.score {
			br.score[i] += math.Log(e[i])
		}
	}
	if loss == LossHuber {
		br.delta0 = br.huberDelta()
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

	b := &Boost{Loss: loss, InitScore: init}
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
		trainLoss := br.gradients() // at the scores after round r−1
		if r > 0 {
			b.TrainLoss = append(b.TrainLoss, trainLoss)
		}
		rng := rand.New(rand.NewPCG(treeSeed(p.Seed, r, streamRows), uint64(r)))
		if p.RowFraction < 1 {
			pick = br.subsample(p.RowFraction, rng, pick)
		}
		for c := range K {
			if K > 1 {
				// This round's targets and weights of class c, all from the scores
				// before the round (Friedman 2001 §4.6).
				yreg := fr.set.yreg
				for _, i := range br.train {
					yreg[i], br.hw[i] = br.mg[int(i)*K+c], br.mh[int(i)*K+c]
				}
			}
			if pick == nil {
				// Every training row: copied in blocks on all threads.
				n := len(br.train)
				rows, wts = rows[:n], wts[:n]
				parallelFor((n+boostBlock-1)/boostBlock, threads, func(k int) {
					for j := k * boostBlock; j < min(n, (k+1)*boostBlock); j++ {
						i := br.train[j]
						rows[j], wts[j] = i, br.hw[i]
					}
				})
			} else {
				rows, wts = rows[:0], wts[:0]
				for k, i := range br.train {
					if pick[k] {
						rows = append(rows, i)
						wts = append(wts, br.hw[i])
					}
				}
			}
			t, err := g.grow(rows, wts, rng)
			if err != nil {
				return nil, nil, err
			}
			br.refit(t, g)
			for k := range t.Value {
				t.Value[k] *= p.LearningRate
			}
			br.update(t, g, pick, c)
			trees = append(trees, t)
		}
		b.Rounds++
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
	b.TrainLoss = append(b.TrainLoss, br.meanLoss(br.train)) // the last round's
	b.BestRound = best + 1
	kept := b.BestRound * K
	clear(trees[kept:]) // let the rounds past the best go
	return trees[:kept:kept], b, nil
}

// split takes the holdout: the rows the data set marks, or a seeded share of the rows
// with positive weight, drawn per class for classification so that both sides keep the
// class mix.
func (br *boostRun) split(p Params) {
	d := br.fr.d
	groups := 1
	switch br.loss {
	case LossLogistic:
		groups = 2
	case LossMultinomial:
		groups = br.K
	}
	hold := make([]bool, d.rows)
	if d.holdout != nil {
		copy(hold, d.holdout)
	} else if p.HoldoutFraction > 0 {
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
	switch br.loss {
	case LossLogistic:
		q := min(max(mean, probClip), 1-probClip)
		return math.Log(q / (1 - q))
	case LossPoisson:
		// The log of the mean count per unit of exposure: with it, predicted and
		// observed totals agree (the balance property of the log link).
		if e := d.exposure.num; e != nil {
			swe := 0.0
			for _, i := range br.train {
				swe += d.weight(int(i)) * e[i]
			}
			return math.Log(max(swy/swe, probClip))
		}
		return math.Log(max(mean, probClip))
	case LossAbsolute, LossHuber:
		return br.quantile(br.train, 0.5, nil)
	case LossQuantile:
		return br.quantile(br.train, br.alpha, nil)
	}
	return mean
}

// classPriors are the multinomial initial scores: the log of each class's weighted
// share of the training rows (clipped away from 0).
func (br *boostRun) classPriors() []float64 {
	d := br.fr.d
	sw := make([]float64, br.K)
	total := 0.0
	for _, i := range br.train {
		w := d.weight(int(i))
		sw[int(br.y[i])] += w
		total += w
	}
	for c := range sw {
		sw[c] = math.Log(max(sw[c]/total, probClip))
	}
	return sw
}

// softmax turns raw scores into probabilities in place; it subtracts the largest
// score first, so no exponential overflows.
func softmax(v []float64) {
	top := v[0]
	for _, x := range v[1:] {
		top = max(top, x)
	}
	sum := 0.0
	for k, x := range v {
		v[k] = math.Exp(x - top)
		sum += v[k]
	}
	for k := range v {
		v[k] /= sum
	}
}

// quantile is the weighted α-quantile of y − F over rows (F = 0 when score is nil).
func (br *boostRun) quantile(rows []int32, alpha float64, score []float64) float64 {
	d := br.fr.d
	v := make([]weighted, len(rows))
	for k, i := range rows {
		r := br.y[i]
		if score != nil {
			r -= score[i]
		}
		v[k] = weighted{r, d.weight(int(i))}
	}
	return weightedQuantile(v, alpha)
}

// huberDelta is the huberAlpha quantile of |y − F| over the training rows.
func (br *boostRun) huberDelta() float64 {
	d := br.fr.d
	v := make([]weighted, len(br.train))
	for k, i := range br.train {
		v[k] = weighted{math.Abs(br.y[i] - br.score[i]), d.weight(int(i))}
	}
	return weightedQuantile(v, huberAlpha)
}

// weighted is a value and its row weight.
type weighted struct{ v, w float64 }

// weightedQuantile is the least value at which the sorted values' cumulative weight
// reaches α of their total (v is reordered).
func weightedQuantile(v []weighted, alpha float64) float64 {
	total := 0.0
	for _, e := range v {
		total += e.w
	}
	slices.SortFunc(v, func(a, b weighted) int { return cmp.Compare(a.v, b.v) })
	cum := 0.0
	for _, e := range v {
		cum += e.w
		if cum >= alpha*total {
			return e.v
		}
	}
	return v[len(v)-1].v
}

// refit replaces the Newton values of a fresh tree's leaves, for the losses whose
// gradient is a sign or clipped (Friedman 2001 §4.2–4.4): absolute takes the leaf's
// weighted median residual y − F, quantile its α-quantile, huber its median r̃ plus the
// weighted mean of sign(r − r̃)·min(δ, |r − r̃|). Leaf penalties do not apply to these
// values; inner nodes keep their Newton values.
func (br *boostRun) refit(t *Tree, g *grower) {
	switch br.loss {
	case LossAbsolute, LossQuantile, LossHuber:
	default:
		return
	}
	d := br.fr.d
	for _, lr := range g.leafRows {
		rows := g.rows[lr.start:lr.end]
		if len(rows) == 0 {
			continue
		}
		var v float64
		switch br.loss {
		case LossAbsolute:
			v = br.quantile(rows, 0.5, br.score)
		case LossQuantile:
			v = br.quantile(rows, br.alpha, br.score)
		case LossHuber:
			med := br.quantile(rows, 0.5, br.score)
			sw, s := 0.0, 0.0
			for _, i := range rows {
				w := d.weight(int(i))
				dr := br.y[i] - br.score[i] - med
				sw += w
				s += w * math.Copysign(min(br.delta, math.Abs(dr)), dr)
			}
			v = med + s/sw
		}
		t.Value[lr.node] = v
	}
}

// gradients writes each training row's Newton target −g/h into the grower's target and
// its weight w·h into hw, and returns the training rows' weighted mean loss at the
// current scores (the previous round's training loss), from the same exponentials.
// Blocks of rows are summed apart and added in block order, as in meanLoss, so the
// result does not depend on the number of threads.
func (br *boostRun) gradients() float64 {
	d, yreg := br.fr.d, br.fr.set.yreg
	n := len(br.train)
	if br.loss == LossHuber {
		br.delta = br.huberDelta()
	}
	blocks := (n + boostBlock - 1) / boostBlock
	sums := slices.Grow(br.sums[:0], 2*blocks)[:2*blocks]
	br.sums = sums
	unweighted := d.weights == nil
	if K := br.K; K > 1 {
		parallelFor(blocks, br.threads, func(k int) {
			pr := make([]float64, K)
			sw, sl := 0.0, 0.0
			var logs logProduct
			for _, i := range br.train[k*boostBlock : min(n, (k+1)*boostBlock)] {
				f := br.score[int(i)*K : int(i+1)*K]
				top := slices.Max(f)
				sum := 0.0
				for c, x := range f {
					pr[c] = math.Exp(x - top)
					sum += pr[c]
				}
				w, yc := d.weight(int(i)), int(br.y[i])
				sw += w
				// log Σ e^F − F_y; sum lies in [1, K].
				if unweighted {
					sl += top - f[yc]
					logs.mul(sum)
				} else {
					sl += w * (top + math.Log(sum) - f[yc])
				}
				for c := range pr {
					pc := pr[c] / sum
					h := max(pc*(1-pc), hessianFloor)
					t := -pc
					if c == yc {
						t = 1 - pc
					}
					br.mg[int(i)*K+c], br.mh[int(i)*K+c] = t/h, w*h
				}
			}
			sl += logs.total()
			sums[2*k], sums[2*k+1] = sw, sl
		})
		return sumBlocks(sums)
	}
	parallelFor(blocks, br.threads, func(k int) {
		sw, sl := 0.0, 0.0
		var logs logProduct
		for _, i := range br.train[k*boostBlock : min(n, (k+1)*boostBlock)] {
			f, y := br.score[i], br.y[i]
			w := d.weight(int(i))
			sw += w
			switch br.loss {
			case LossLogistic:
				// The log loss is max(F, 0) − yF + log(1 + e^−|F|).
				e := math.Exp(-math.Abs(f))
				pr := 1 / (1 + e)
				if f < 0 {
					pr = e / (1 + e)
				}
				if unweighted {
					sl += max(f, 0) - y*f
					logs.mul(1 + e)
				} else {
					sl += w * (max(f, 0) - y*f + math.Log(1+e))
				}
				h := max(pr*(1-pr), hessianFloor)
				yreg[i] = (y - pr) / h
				br.hw[i] = w * h
				continue
			case LossPoisson:
				fc := min(f, poissonMaxScore)
				mu := math.Exp(fc)
				sl += w * 2 * (mu - y + br.ylogy[i] - y*fc)
				h := max(mu, hessianFloor)
				yreg[i] = (y - mu) / h
				br.hw[i] = w * h
				continue
			}
			sl += w * br.rowLoss(y, f)
			r := y - f
			switch br.loss {
			case LossAbsolute:
				r = sign(r)
			case LossQuantile:
				if r > 0 {
					r = br.alpha
				} else if r < 0 {
					r = br.alpha - 1
				}
			case LossHuber:
				if math.Abs(r) > br.delta {
					r = br.delta * sign(r)
				}
			}
			yreg[i] = r
			br.hw[i] = w
		}
		sl += logs.total()
		sums[2*k], sums[2*k+1] = sw, sl
	})
	return sumBlocks(sums)
}

// logProduct sums logarithms of factors ≥ 1 with one logarithm per logChunk factors (or
// sooner, should the product pass 1e280): the log of their product, which differs from
// the sum of their logs by rounding only. The gradient pass takes the training log loss
// of unweighted rows this way, where one log per row cost as much as the rest of the
// pass. The sum stays in the struct (not behind a pointer to the caller's), so the
// loop's other sums stay in registers.
type logProduct struct {
	prod, sum float64
	n         int
}

const logChunk = 32

func (lp *logProduct) mul(x float64) {
	if lp.n == 0 {
		lp.prod = 1
	}
	lp.prod *= x
	if lp.n++; lp.n == logChunk || lp.prod > 1e280 {
		lp.sum += math.Log(lp.prod)
		lp.n = 0
	}
}

// total is the sum of the logs of every factor so far.
func (lp *logProduct) total() float64 {
	if lp.n > 0 {
		lp.sum += math.Log(lp.prod)
		lp.n = 0
	}
	return lp.sum
}

// sumBlocks adds per-block (weight, loss) sums in block order and returns the mean loss.
func sumBlocks(sums []float64) float64 {
	sw, sl := 0.0, 0.0
	for k := 0; k < len(sums); k += 2 {
		sw += sums[k]
		sl += sums[k+1]
	}
	return sl / sw
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
func (br *boostRun) update(t *Tree, g *grower, pick []bool, c int) {
	K := br.K
	// Each row is in one leaf, so leaves can be taken by several threads.
	parallelFor(len(g.leafRows), br.threads, func(k int) {
		lr := g.leafRows[k]
		v := t.Value[lr.node]
		for _, r := range g.rows[lr.start:lr.end] {
			br.score[int(r)*K+c] += v
		}
	})
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
			br.score[int(rest[lo+j])*K+c] += t.Value[leaf]
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
			sw += w
			if K := br.K; K > 1 {
				// log Σ exp(F) − F_y, from the largest score for stability.
				f := br.score[int(i)*K : int(i+1)*K]
				top := slices.Max(f)
				s := 0.0
				for _, x := range f {
					s += math.Exp(x - top)
				}
				sl += w * (top + math.Log(s) - f[int(br.y[i])])
				continue
			}
			sl += w * br.rowLoss(br.y[i], br.score[i])
		}
		sums[2*k], sums[2*k+1] = sw, sl
	})
	return sumBlocks(sums)
}

// rowLoss is one row's loss at raw score f: squared error, log loss, absolute error,
// Huber loss at the first round's δ, pinball loss, or Poisson deviance.
func (br *boostRun) rowLoss(y, f float64) float64 {
	r := y - f
	switch br.loss {
	case LossLogistic:
		l, _ := logisticLoss(f, y)
		return l
	case LossAbsolute:
		return math.Abs(r)
	case LossHuber:
		if a := math.Abs(r); a > br.delta0 {
			return br.delta0 * (a - br.delta0/2)
		}
		return r * r / 2
	case LossQuantile:
		if r >= 0 {
			return br.alpha * r
		}
		return (br.alpha - 1) * r
	case LossPoisson:
		// 2(y log(y/μ) − (y − μ)) with log μ = F, y log y = 0 at y = 0.
		f = min(f, poissonMaxScore)
		l := math.Exp(f) - y
		if y > 0 {
			l += y * (math.Log(y) - f)
		}
		return 2 * l
	}
	return r * r
}

// logisticLoss is the log loss log(1 + e^F) − yF at raw score F and the probability
// p = 1/(1 + e^−F), both from one exponential e^−|F| so that neither overflows. The
// logarithm is of 1 + e^−|F| (math.Log, not Log1p, which costs twice as much): for
// e^−|F| below 1e-16 it returns 0 where the loss is below 1e-16.
func logisticLoss(f, y float64) (loss, p float64) {
	e := math.Exp(-math.Abs(f))
	p = 1 / (1 + e)
	if f < 0 {
		p = e / (1 + e)
	}
	return max(f, 0) + math.Log(1+e) - y*f, p
}

// sign is −1, 0 or 1.
func sign(x float64) float64 {
	switch {
	case x > 0:
		return 1
	case x < 0:
		return -1
	}
	return 0
}

// boostLoss resolves the loss for a task and checks it fits the target.
func boostLoss(p Params, task Task, classes int) (Loss, error) {
	loss := p.Loss
	if loss == "" {
		switch {
		case task == Regression:
			loss = LossSquared
		case classes == 2:
			loss = LossLogistic
		default:
			loss = LossMultinomial
		}
	}
	switch {
	case task == Regression && !regressionLoss(loss):
		return "", fmt.Errorf("forest: loss %q: regression takes %s", loss, regressionLosses)
	case task == Classification && loss != LossLogistic && loss != LossMultinomial:
		return "", fmt.Errorf("forest: loss %q: classification takes %q or %q", loss, LossLogistic, LossMultinomial)
	case loss == LossLogistic && classes != 2:
		return "", fmt.Errorf("forest: loss %q: the target has %d classes, want 2 (loss %q takes more)", loss, classes, LossMultinomial)
	case loss == LossMultinomial && classes < 3:
		return "", fmt.Errorf("forest: loss %q: the target has %d classes, want 3 or more (loss %q takes 2)", loss, classes, LossLogistic)
	}
	return loss, nil
}
