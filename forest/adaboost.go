package forest

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// AdaBoost (Freund & Schapire 1997) in its multiclass form SAMME (Zhu, Zou, Rosset &
// Hastie 2009). Each round grows a shallow classification tree (Gini) on the current row
// weights; its class at a leaf is the leaf's heaviest class. With ε the tree's weighted
// error and K the classes, its weight is α = learning_rate · (ln((1−ε)/ε) + ln(K−1)); the
// weights of the rows it misclassifies are multiplied by e^α and all weights rescaled to
// sum to the number of training rows (so MinLeaf keeps its meaning of a row count on
// average). Rounds stop early when ε ≥ 1 − 1/K (no better than chance: the tree is
// dropped, and training fails if it is the first) or when ε = 0 (a perfect tree, which
// later rounds would only repeat: it is kept with a finite α, the formula's at
// ε = adaPerfectError plus the sum of the earlier trees' α, so that it outvotes them all
// and the training error is 0, as the limit α → ∞ gives). For K = 2 and learning rate 1 the reweighting equals discrete AdaBoost's and α is
// twice its ½ln((1−ε)/ε), so the votes and the training error are the same.

// adaPerfectError stands in for ε = 0 in α's formula: ln((1−ε)/ε) ≈ 23.
const adaPerfectError = 1e-10

// AdaBoost is what an AdaBoost model adds: a vote weight per tree. A prediction's class
// scores are Σ_t α_t·[tree t's class is k], and its probabilities those scores divided by
// Σ_t α_t (the α-weighted vote shares), so their argmax is SAMME's class.
type AdaBoost struct {
	Alpha []float64 // α of each tree, finite and > 0
	Error []float64 // weighted training error ε of each tree in its round, in [0, 1 − 1/K)
}

// adaboost trains the rounds and returns the trees and their record.
func (fr *fitRun) adaboost(threads int) ([]*Tree, *AdaBoost, error) {
	d, p := fr.d, fr.p
	n, F := d.rows, len(d.features)
	K := len(d.target.levels)
	var rows []int32
	w := make([]float64, n)
	for i := range n {
		if wi := d.weight(i); wi > 0 {
			rows = append(rows, int32(i))
			w[i] = wi
		}
	}
	if len(rows) == 0 {
		return nil, nil, fmt.Errorf("forest: method %q: no rows with positive weight", MethodAdaBoost)
	}
	rescale := func() {
		s := 0.0
		for _, i := range rows {
			s += w[i]
		}
		c := float64(len(rows)) / s
		for _, i := range rows {
			w[i] *= c
		}
	}
	rescale()
	x := make([]float64, n*F)
	parallelFor((n+boostBlock-1)/boostBlock, threads, func(k int) {
		for i := k * boostBlock; i < min(n, (k+1)*boostBlock); i++ {
			rowOf(d, i, x[i*F:(i+1)*F])
		}
	})
	cfg := fr.cfg
	cfg.threads = threads
	g := newGrower(fr.set, cfg, fr.stop)
	miss := make([]bool, n)
	rs := make([]int32, len(rows))
	ws := make([]float64, len(rows))
	ab := &AdaBoost{}
	var trees []*Tree
	chance := 1 - 1/float64(K)
	for r := range p.Trees {
		if fr.stop.Load() {
			return nil, nil, errStopped
		}
		copy(rs, rows)
		for k, i := range rows {
			ws[k] = w[i]
		}
		rng := rand.New(rand.NewPCG(treeSeed(p.Seed, r, streamRows), uint64(r)))
		t, err := g.grow(rs, ws, rng)
		if err != nil {
			return nil, nil, err
		}
		parallelFor((len(rows)+boostBlock-1)/boostBlock, threads, func(k int) {
			for _, i := range rows[k*boostBlock : min(len(rows), (k+1)*boostBlock)] {
				miss[i] = Class(t.NodeValue(t.Leaf(x[int(i)*F:(int(i)+1)*F]))) != int(d.target.codes[i])
			}
		})
		bad, all := 0.0, 0.0
		for _, i := range rows {
			all += w[i]
			if miss[i] {
				bad += w[i]
			}
		}
		eps := bad / all
		if eps >= chance {
			if r == 0 {
				return nil, nil, fmt.Errorf("forest: method %q: the first tree's weighted error %g is no better than chance (%g)", MethodAdaBoost, eps, chance)
			}
			break
		}
		e := max(eps, adaPerfectError)
		alpha := p.LearningRate * (math.Log((1-e)/e) + math.Log(float64(K-1)))
		if eps == 0 {
			for _, a := range ab.Alpha {
				alpha += a
			}
		}
		trees = append(trees, t)
		ab.Alpha = append(ab.Alpha, alpha)
		ab.Error = append(ab.Error, eps)
		if p.Progress != nil {
			p.Progress(r+1, p.Trees)
		}
		if eps == 0 {
			break
		}
		up := math.Exp(alpha)
		for _, i := range rows {
			if miss[i] {
				w[i] *= up
			}
		}
		rescale()
	}
	return trees, ab, nil
}

// adaVote adds α to the score of the class of the leaf v (a tree's class weights).
func adaVote(v []float64, alpha float64, dst []float64) {
	dst[Class(v)] += alpha
}
