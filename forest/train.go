package forest

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"
)

// Train fits a model. Cancelling ctx stops training between nodes and returns ctx.Err().
// The model does not depend on Params.Threads: the same data and seed give the same
// model, byte for byte, on any number of threads.
func Train(ctx context.Context, d *Dataset, p Params) (*Model, error) {
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("forest: train: %w", err)
	}
	if err := p.Validate(); err != nil {
		return nil, err
	}
	task := p.Task
	if task == "" {
		task = Regression
		if d.target.kind == Categorical {
			task = Classification
		}
	}
	if err := d.check(task); err != nil {
		return nil, err
	}
	if p.Method == MethodAdaBoost && task != Classification {
		return nil, fmt.Errorf("forest: method %q classifies: target %q is numeric", MethodAdaBoost, d.target.name)
	}
	drawn, err := p.featuresPerSplit(task, len(d.features))
	if err != nil {
		return nil, err
	}
	if p.Impurity == "" && task == Classification {
		p.Impurity = Gini
	}
	if task == Regression || p.Method == MethodBoosting {
		p.Impurity = ""
	}
	var loss Loss
	if p.Method == MethodBoosting {
		if loss, err = boostLoss(p, task, len(d.target.levels)); err != nil {
			return nil, err
		}
		p.Loss = loss
		if loss == LossQuantile && p.Quantile == 0 {
			p.Quantile = DefaultQuantile
		}
	}
	if d.holdout != nil {
		switch {
		case p.Method != MethodBoosting:
			return nil, fmt.Errorf("forest: holdout rows: method %q does not stop early on a holdout", p.Method)
		case p.HoldoutFraction != 0:
			return nil, fmt.Errorf("forest: holdout_fraction %g: the data set marks its own holdout rows; give one or the other", p.HoldoutFraction)
		}
	}
	if e := d.exposure.name; d.exposure.kind != 0 || p.Exposure != "" {
		switch {
		case p.Exposure != "" && p.Exposure != e:
			return nil, fmt.Errorf("forest: exposure %q: the data set's exposure is %q", p.Exposure, e)
		case loss != LossPoisson:
			return nil, fmt.Errorf("forest: exposure %q: only loss %q takes an exposure", e, LossPoisson)
		}
		p.Exposure = e
	}
	threads := p.Threads
	if threads == 0 {
		threads = runtime.GOMAXPROCS(0)
	}

	var stop atomic.Bool
	done := make(chan struct{})
	defer close(done)
	go func() {
		select {
		case <-ctx.Done():
			stop.Store(true)
		case <-done:
		}
	}()

	set := binData(d, task, p, threads)
	m := &Model{
		Method: p.Method, Task: task, Target: d.target.name, Rows: d.rows,
		Features: make([]FeatureInfo, len(d.features)),
	}
	for i, c := range d.features {
		m.Features[i] = FeatureInfo{Name: c.name, Kind: c.kind, Levels: append([]string(nil), c.levels...), Binning: set.bins[i]}
	}
	if task == Classification {
		m.Classes = append([]string(nil), d.target.levels...)
	}
	stored := p
	stored.Threads, stored.Progress = 0, nil
	stored.Task = task
	m.Params = stored

	cfg := growConfig{maxDepth: p.MaxDepth, minLeaf: p.MinLeaf, minGain: p.MinGain, drawn: drawn, leafLimit: p.LeafLimit}
	fr := &fitRun{d: d, set: set, p: p, cfg: cfg, stop: &stop}
	switch p.Method {
	case MethodBoosting:
		m.Trees, m.Boost, err = fr.boost(loss, threads)
	case MethodAdaBoost:
		m.Trees, m.AdaBoost, err = fr.adaboost(threads)
	case MethodLinear:
		m.Linear, err = fitLinear(d, task, p.Ridge)
	default:
		m.Trees, fr.inbag, err = fr.growAll(threads)
	}
	if err != nil {
		if ctx.Err() != nil {
			return nil, fmt.Errorf("forest: train: %w", ctx.Err())
		}
		return nil, err
	}
	// Out-of-bag results and permutation importance need bootstrap trees that each saw
	// part of the rows; boosted trees fit each other's residuals, so neither applies.
	bagged := p.Method != MethodTree && p.Method != MethodBoosting && p.Method != MethodAdaBoost && p.Method != MethodLinear
	if p.Method == MethodLinear {
		return m, nil // no importance: the coefficients explain a linear model
	}
	if bagged {
		oob, err := outOfBag(m, d, fr.inbag, threads, &stop)
		if err != nil {
			return nil, fmt.Errorf("forest: train: %w", ctx.Err())
		}
		m.OOB = oob
	}
	m.Importance.Impurity = impurityImportance(m)
	if bagged && p.PermutationRows >= 0 {
		mean, sd, err := permutationImportance(m, d, fr.inbag, p, threads, &stop)
		if err != nil {
			return nil, fmt.Errorf("forest: train: %w", ctx.Err())
		}
		m.Importance.Permutation, m.Importance.PermutationStd = mean, sd
	}
	// The watcher may not have run yet on a busy machine: ask ctx itself.
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("forest: train: %w", err)
	}
	return m, nil
}

// binData bins every feature (in parallel) and packs the target.
func binData(d *Dataset, task Task, p Params, threads int) *trainSet {
	F := len(d.features)
	set := &trainSet{rows: d.rows, task: task, features: F, bins: make([]Binning, F)}
	cols := make([]binnedColumn, F)
	sample := sampleRows(d, p.Seed)
	parallelFor(F, threads, func(i int) {
		c := &d.features[i]
		if c.kind == Categorical {
			set.bins[i], cols[i] = binCategorical(d, c.codes, len(c.levels), p.Bins)
		} else {
			set.bins[i], cols[i] = binNumeric(d, c.num, sample, p.Bins)
		}
	})
	wide := false
	for _, c := range cols {
		wide = wide || c.u16 != nil
	}
	if wide {
		set.mat16 = make([]uint16, d.rows*F)
	} else {
		set.mat8 = make([]uint8, d.rows*F)
	}
	const block = 1 << 14
	parallelFor((d.rows+block-1)/block, threads, func(k int) {
		for i := k * block; i < min(d.rows, (k+1)*block); i++ {
			for f := range cols {
				if wide {
					set.mat16[i*F+f] = uint16(cols[f].at(int32(i)))
				} else {
					set.mat8[i*F+f] = cols[f].u8[i]
				}
			}
		}
	})
	// Column copies for the partition, which reads one feature of each row: a column
	// keeps those bytes together, where the row-major matrix spreads them a cache line
	// apart. Narrow columns are the binning's own.
	if wide {
		set.col16 = make([][]uint16, F)
		for f := range cols {
			if cols[f].u16 != nil {
				set.col16[f] = cols[f].u16
				continue
			}
			c := make([]uint16, d.rows)
			for i, b := range cols[f].u8 {
				c[i] = uint16(b)
			}
			set.col16[f] = c
		}
	} else {
		set.col8 = make([][]uint8, F)
		for f := range cols {
			set.col8[f] = cols[f].u8
		}
	}
	if p.Method == MethodBoosting {
		// Boosted trees are regression trees on Newton targets whatever the task; the
		// boosting loop writes the targets into yreg before each round.
		set.task, set.newton, set.rowWeight = Regression, true, d.weights
		set.yreg = make([]float64, d.rows)
		set.stat, set.totalWidth = newtonStat, 4
		set.penalty = p.LeafPenalty
		set.score = penalizedScore(p.LeafPenalty)
	} else if task == Classification {
		set.classes = len(d.target.levels)
		set.ycls = d.target.codes
		set.stat, set.totalWidth = set.classes, set.classes
		set.score, set.impurity = giniScore, Gini
		if p.Impurity == Entropy {
			set.impurity = Entropy
			set.score = entropyScore
		}
	} else {
		set.yreg = d.target.num
		set.stat, set.totalWidth = 2, 3
		set.score = squaredScore
	}
	return set
}

// parallelFor runs f(0…n-1) on up to threads goroutines.
func parallelFor(n, threads int, f func(i int)) {
	var next atomic.Int64
	var wg sync.WaitGroup
	for range min(n, max(threads, 1)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				f(i)
			}
		}()
	}
	wg.Wait()
}

// treeSeed derives tree b's seed from the master seed (SplitMix64 finaliser), so every
// tree has its own random stream whichever worker grows it.
func treeSeed(seed uint64, b int, stream uint64) uint64 {
	z := seed + uint64(b+1)*0x9e3779b97f4a7c15 + stream*0xbf58476d1ce4e5b9
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// Stream tags keep the random draws of different stages apart.
const (
	streamRows        = 1
	streamPermutation = 2
)

// fitRun is one training run's shared state.
type fitRun struct {
	d     *Dataset
	set   *trainSet
	p     Params
	cfg   growConfig
	stop  *atomic.Bool
	inbag [][]uint64
}

// growAll grows every tree on up to threads workers and returns them in order, with each
// tree's in-bag rows as a bit set (nil for MethodTree).
func (fr *fitRun) growAll(threads int) ([]*Tree, [][]uint64, error) {
	B := fr.p.Trees
	trees := make([]*Tree, B)
	var inbag [][]uint64
	if fr.p.Method != MethodTree {
		inbag = make([][]uint64, B)
	}
	var (
		mu    sync.Mutex
		done  int
		first error
	)
	workers := min(B, max(threads, 1))
	var next atomic.Int64
	var wg sync.WaitGroup
	for range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			g := newGrower(fr.set, fr.cfg, fr.stop)
			s := newSampler(fr.d)
			for {
				b := int(next.Add(1) - 1)
				if b >= B || fr.stop.Load() {
					return
				}
				rng := rand.New(rand.NewPCG(treeSeed(fr.p.Seed, b, streamRows), uint64(b)))
				rows, wts, bag := s.draw(fr.p, rng)
				t, err := g.grow(rows, wts, rng)
				mu.Lock()
				if err != nil {
					if first == nil {
						first = err
					}
					fr.stop.Store(true)
					mu.Unlock()
					return
				}
				trees[b] = t
				if inbag != nil {
					inbag[b] = bag
				}
				done++
				if fr.p.Progress != nil {
					fr.p.Progress(done, B)
				}
				mu.Unlock()
			}
		}()
	}
	wg.Wait()
	if first != nil {
		return nil, nil, first
	}
	if done < B {
		return nil, nil, errStopped
	}
	return trees, inbag, nil
}

// sampler draws each tree's rows; one per worker.
type sampler struct {
	d      *Dataset
	counts []uint32
	perm   []int32
	rows   []int32
	wts    []float64
}

func newSampler(d *Dataset) *sampler {
	return &sampler{d: d, counts: make([]uint32, d.rows), rows: make([]int32, 0, d.rows), wts: make([]float64, 0, d.rows)}
}

// draw returns the rows of one tree in increasing order, each weighted by its row weight
// times the number of times it was drawn, and the drawn rows as a bit set. MethodTree
// takes every row once and returns no bit set. Zero-weight rows are left out.
func (s *sampler) draw(p Params, rng *rand.Rand) ([]int32, []float64, []uint64) {
	n := s.d.rows
	s.rows, s.wts = s.rows[:0], s.wts[:0]
	if p.Method == MethodTree {
		for i := range n {
			if w := s.d.weight(i); w > 0 {
				s.rows = append(s.rows, int32(i))
				s.wts = append(s.wts, w)
			}
		}
		return s.rows, s.wts, nil
	}
	clear(s.counts)
	m := max(1, int(math.Round(p.RowFraction*float64(n))))
	if p.WithReplacement {
		for range m {
			s.counts[rng.IntN(n)]++
		}
	} else {
		if s.perm == nil {
			s.perm = make([]int32, n)
		}
		for i := range s.perm {
			s.perm[i] = int32(i)
		}
		for j := range m {
			k := j + rng.IntN(n-j)
			s.perm[j], s.perm[k] = s.perm[k], s.perm[j]
			s.counts[s.perm[j]] = 1
		}
	}
	bag := make([]uint64, (n+63)/64)
	for i, c := range s.counts {
		if c == 0 {
			continue
		}
		bag[i>>6] |= 1 << (i & 63)
		if w := s.d.weight(i); w > 0 {
			s.rows = append(s.rows, int32(i))
			s.wts = append(s.wts, w*float64(c))
		}
	}
	return s.rows, s.wts, bag
}

func inBag(bag []uint64, row int) bool { return bag[row>>6]&(1<<(row&63)) != 0 }
