package forest

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// streamFolds keeps the fold draw apart from the trees' own random streams.
const streamFolds = 3

// Folds splits the rows of d into k folds for cross-validation and returns each fold's
// rows in ascending order. The split depends only on the data's targets, k and seed.
//
// A class target is stratified: the rows of each class are shuffled (one seeded stream,
// classes in code order) and dealt round-robin over the folds, each class starting where
// the previous one stopped. So every fold holds ⌊n_c/k⌋ or ⌈n_c/k⌉ rows of class c —
// within one row of its exact share — and the fold sizes differ by at most one. A
// numeric target is shuffled as a whole and dealt the same way.
//
// Rows of weight 0 are dealt like any other row (the shares are of row counts); a
// fold's metrics give them no weight, and training treats them as [Dataset.SetWeights]
// says.
func Folds(d *Dataset, k int, seed uint64) ([][]int32, error) {
	if d.target.kind == 0 {
		return nil, fmt.Errorf("%w: no target", ErrData)
	}
	if k < 2 {
		return nil, fmt.Errorf("forest: folds %d: want at least 2", k)
	}
	if k > d.rows {
		return nil, fmt.Errorf("forest: folds %d: the data has only %d rows", k, d.rows)
	}
	var groups [][]int32
	if d.target.kind == Categorical {
		groups = make([][]int32, len(d.target.levels))
		for i, c := range d.target.codes {
			groups[c] = append(groups[c], int32(i))
		}
	} else {
		all := make([]int32, d.rows)
		for i := range all {
			all[i] = int32(i)
		}
		groups = [][]int32{all}
	}
	rng := rand.New(rand.NewPCG(seed, streamFolds))
	folds := make([][]int32, k)
	next := 0
	for _, g := range groups {
		rng.Shuffle(len(g), func(a, b int) { g[a], g[b] = g[b], g[a] })
		for _, r := range g {
			folds[next] = append(folds[next], r)
			next = (next + 1) % k
		}
	}
	for _, f := range folds {
		slices.Sort(f)
	}
	return folds, nil
}

// Subset returns a new data set of the given rows of d, in that order, with the same
// features, levels, classes, weights and exposure. A class that none of the rows hold
// stays in the class list, so a model trained on the subset predicts the same classes.
func (d *Dataset) Subset(rows []int32) (*Dataset, error) {
	for _, r := range rows {
		if r < 0 || int(r) >= d.rows {
			return nil, fmt.Errorf("%w: subset row %d of %d", ErrData, r, d.rows)
		}
	}
	s := &Dataset{rows: len(rows), names: d.names, features: make([]column, len(d.features))}
	for f, c := range d.features {
		s.features[f] = c.subset(rows)
	}
	if d.target.kind != 0 {
		s.target = d.target.subset(rows)
	}
	if d.exposure.kind != 0 {
		s.exposure = d.exposure.subset(rows)
	}
	if d.weights != nil {
		s.weights = pick(d.weights, rows)
	}
	return s, nil
}

func (c column) subset(rows []int32) column {
	out := column{name: c.name, kind: c.kind, levels: c.levels}
	if c.num != nil {
		out.num = pick(c.num, rows)
	}
	if c.codes != nil {
		out.codes = pick(c.codes, rows)
	}
	return out
}

func pick[T any](s []T, rows []int32) []T {
	out := make([]T, len(rows))
	for j, r := range rows {
		out[j] = s[r]
	}
	return out
}

// ValidationMetrics are the names, in order, of the metrics [HeldOut] and [OOBMetrics]
// report: for classes error, accuracy, auc (two classes only), log_loss and brier; for
// numbers rmse, mae and r2. Each is defined as in [EvaluateClassification] and
// [EvaluateRegression].
func ValidationMetrics(task Task, classes int) []string {
	if task == Regression {
		return []string{"rmse", "mae", "r2"}
	}
	if classes == 2 {
		return []string{"error", "accuracy", "auc", "log_loss", "brier"}
	}
	return []string{"error", "accuracy", "log_loss", "brier"}
}

// LowerIsBetter reports whether a smaller value of the named metric is better; accuracy,
// auc and r2 are the ones where larger is better.
func LowerIsBetter(metric string) bool {
	switch metric {
	case "accuracy", "auc", "r2", "balanced_accuracy", "precision", "recall", "f1":
		return false
	}
	return true
}

// HeldOut scores m on the given rows of d against their targets, with the metrics of
// [ValidationMetrics], weighted by row weight. A model with an exposure (Poisson) is
// scored on its predicted counts: rate × exposure.
func HeldOut(m *Model, d *Dataset, rows []int32) ([]Metric, error) {
	if len(rows) == 0 {
		return nil, fmt.Errorf("%w: no rows to score", ErrEvaluate)
	}
	if len(m.Features) != len(d.features) {
		return nil, fmt.Errorf("%w: the model has %d features, the data %d", ErrEvaluate, len(m.Features), len(d.features))
	}
	W := m.Width()
	pred := make([]float64, len(rows)*W)
	row := make([]float64, len(d.features))
	for j, r := range rows {
		rowOf(d, int(r), row)
		m.PredictRow(row, pred[j*W:(j+1)*W])
	}
	return validate(m.Task, d, rows, pred, W)
}

// OOBMetrics are the metrics of [ValidationMetrics] over the out-of-bag predictions of m,
// a bagged model trained on d, over the rows at least one tree left out: so that an
// out-of-bag estimate and a cross-validated one are computed alike.
func OOBMetrics(m *Model, d *Dataset) ([]Metric, error) {
	if m.OOB == nil {
		return nil, fmt.Errorf("%w: method %q has no out-of-bag predictions", ErrEvaluate, m.Method)
	}
	if m.Rows != d.rows {
		return nil, fmt.Errorf("%w: the model was trained on %d rows, the data has %d", ErrEvaluate, m.Rows, d.rows)
	}
	W := m.Width()
	var rows []int32
	var pred []float64
	for i := 0; i < d.rows; i++ {
		v := m.OOB.Value[i*W : (i+1)*W]
		if m.OOB.Votes[i] == 0 || math.IsNaN(v[0]) {
			continue
		}
		rows = append(rows, int32(i))
		pred = append(pred, v...)
	}
	if len(rows) == 0 {
		return nil, fmt.Errorf("%w: no row was left out by any tree", ErrEvaluate)
	}
	return validate(m.Task, d, rows, pred, W)
}

// validate computes the validation metrics of predictions (W numbers per row) of the
// given rows of d.
func validate(task Task, d *Dataset, rows []int32, pred []float64, W int) ([]Metric, error) {
	var w []float64
	if d.weights != nil {
		w = pick(d.weights, rows)
	}
	var all []Metric
	if task == Classification {
		if d.target.kind != Categorical {
			return nil, fmt.Errorf("%w: target %q is numeric", ErrEvaluate, d.target.name)
		}
		ev, err := EvaluateClassification(pick(d.target.codes, rows), pred, W, w)
		if err != nil {
			return nil, err
		}
		all = ev.Metrics
	} else {
		if d.target.kind != Numeric {
			return nil, fmt.Errorf("%w: target %q holds classes", ErrEvaluate, d.target.name)
		}
		if d.exposure.kind != 0 {
			for j, r := range rows {
				pred[j] *= d.exposure.num[r]
			}
		}
		var err error
		if all, err = EvaluateRegression(pick(d.target.num, rows), pred, w); err != nil {
			return nil, err
		}
	}
	names := ValidationMetrics(task, W)
	out := make([]Metric, len(names))
	for i, n := range names {
		out[i] = Metric{n, MetricValue(all, n)}
	}
	return out, nil
}

// CrossValidate trains one model per fold on the rows of the other folds and scores it
// on the fold's own rows with [HeldOut]: out[i] holds fold i's metrics. Every model uses
// p as given (the same seed), so, like [Train], the result does not depend on p.Threads.
// progress, when set, is called as each fold's trees finish. Cancelling ctx stops it.
func CrossValidate(ctx context.Context, d *Dataset, p Params, folds [][]int32, progress func(fold, done, total int)) ([][]Metric, error) {
	if len(folds) < 2 {
		return nil, fmt.Errorf("forest: cross-validation needs at least 2 folds, got %d", len(folds))
	}
	out := make([][]Metric, len(folds))
	for i := range folds {
		q := p
		if progress != nil {
			q.Progress = func(done, total int) { progress(i, done, total) }
		}
		_, ms, err := TrainFold(ctx, d, q, folds, i)
		if err != nil {
			return nil, err
		}
		out[i] = ms
	}
	return out, nil
}

// TrainFold trains on every fold but fold i and scores the model on fold i.
func TrainFold(ctx context.Context, d *Dataset, p Params, folds [][]int32, i int) (*Model, []Metric, error) {
	if i < 0 || i >= len(folds) {
		return nil, nil, fmt.Errorf("forest: fold %d of %d", i+1, len(folds))
	}
	var train []int32
	for j, f := range folds {
		if j != i {
			train = append(train, f...)
		}
	}
	slices.Sort(train)
	sub, err := d.Subset(train)
	if err != nil {
		return nil, nil, err
	}
	m, err := Train(ctx, sub, p)
	if err != nil {
		return nil, nil, fmt.Errorf("fold %d: %w", i+1, err)
	}
	ms, err := HeldOut(m, d, folds[i])
	if err != nil {
		return nil, nil, fmt.Errorf("fold %d: %w", i+1, err)
	}
	return m, ms, nil
}

// Summarize returns, per metric, the mean over folds and the sample standard deviation
// (n − 1 in the denominator; NaN for one fold). A fold where a metric is undefined (NaN)
// is left out of that metric's figures.
func Summarize(perFold [][]Metric) (mean, std []Metric) {
	if len(perFold) == 0 {
		return nil, nil
	}
	for j, m := range perFold[0] {
		var s float64
		n := 0
		for _, f := range perFold {
			if v := f[j].Value; !math.IsNaN(v) {
				s += v
				n++
			}
		}
		mu := s / float64(n)
		var ss float64
		for _, f := range perFold {
			if v := f[j].Value; !math.IsNaN(v) {
				ss += (v - mu) * (v - mu)
			}
		}
		sd := math.NaN()
		if n > 1 {
			sd = math.Sqrt(ss / float64(n-1))
		}
		if n == 0 {
			mu = math.NaN()
		}
		mean = append(mean, Metric{m.Name, mu})
		std = append(std, Metric{m.Name, sd})
	}
	return mean, std
}
