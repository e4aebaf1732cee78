package udf

import (
	"context"
	"database/sql"
	"fmt"
	"time"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// registerTraining registers copse_train, copse_drop, copse_models and copse_jobs. All
// four are table functions whose bind has no side effects (DuckDB binds for EXPLAIN,
// DESCRIBE and prepare, sometimes twice); the work happens in the first fill.
func (h *Host) registerTraining(conn *sql.Conn) error {
	for _, f := range []duck.TableFunc{
		{Name: "copse_train", Args: []duck.Type{duck.Varchar, duck.Varchar}, Named: trainOptions, Bind: h.bindTrain},
		{Name: "copse_drop", Args: []duck.Type{duck.Varchar}, Bind: h.bindDrop},
		{Name: "copse_models", Bind: h.bindModels},
		{Name: "copse_jobs", Bind: h.bindJobs},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return nil
}

// trainColumns is copse_train's one result row.
var trainColumns = []duck.Column{
	{Name: "model", Type: duck.Varchar}, {Name: "version", Type: duck.BigInt},
	{Name: "method", Type: duck.Varchar}, {Name: "task", Type: duck.Varchar},
	{Name: "target", Type: duck.Varchar}, {Name: "rows", Type: duck.BigInt},
	{Name: "rows_skipped", Type: duck.BigInt}, {Name: "features", Type: duck.BigInt},
	{Name: "trees", Type: duck.BigInt}, {Name: "oob_metric", Type: duck.Varchar},
	{Name: "oob_value", Type: duck.Double}, {Name: "seconds", Type: duck.Double},
}

// bindTrain checks the options and, by describing the source (which binds it without
// running it), the columns: an EXPLAIN or a prepare reports bad input without training.
func (h *Host) bindTrain(call duck.TableCall) (*duck.TableBinding, error) {
	c, err := parseTrainCall(call.Args, call.Named)
	if err != nil {
		return nil, err
	}
	cols, err := h.describe(h.contextOf(call.ConnID), c)
	if err != nil {
		return nil, err
	}
	l, err := c.resolve(cols)
	if err != nil {
		return nil, err
	}
	if err := c.checkLoss(l, cols); err != nil {
		return nil, err
	}
	return h.savingBinding(call.ConnID, func(ctx context.Context) (trainResult, error) {
		return h.train(ctx, c)
	}), nil
}

// savingBinding is the binding of a function that stores a model version in its first
// fill (save, under the running statement's context) and returns copse_train's row.
func (h *Host) savingBinding(connID uint64, save func(ctx context.Context) (trainResult, error)) *duck.TableBinding {
	return &duck.TableBinding{
		Columns: trainColumns,
		Init: func() (duck.FillFunc, error) {
			var r trainResult
			return onceRows(func() (int, error) {
				var err error
				r, err = save(h.contextOf(connID))
				return 1, err
			}, func(out *duck.Chunk, k, _ int) {
				e := r.entry
				setEntryHead(out, k, e)
				out.SetInt64(6, k, int64(r.skipped))
				out.SetInt64(7, k, int64(e.Features))
				out.SetInt64(8, k, int64(e.Trees))
				setOOB(out, 9, k, e) // a blend with learned weights: its holdout loss
				out.SetFloat64(11, k, r.seconds)
			}), nil
		},
	}
}

// trainResult is what one training reports.
type trainResult struct {
	entry   Entry
	skipped int
	seconds float64
}

// train runs one copse_train call: read, train, save. Nothing reaches the catalog unless
// every step succeeds; saveModel writes in one transaction.
func (h *Host) train(ctx context.Context, c *trainCall) (trainResult, error) {
	start := time.Now()
	job := h.jobs.start(c.name, string(c.params.Method), c.params.Trees)
	defer h.jobs.finish(job)

	data, err := h.readTraining(ctx, c)
	if err != nil {
		return trainResult{}, err
	}
	h.jobs.update(job, func(j *Job) { j.Stage = "training" })
	p := c.params
	p.Progress = func(done, total int) {
		h.jobs.update(job, func(j *Job) {
			j.TreesDone, j.Trees = done, total
			bagged := p.Method != forest.MethodTree && p.Method != forest.MethodBoosting && p.Method != forest.MethodAdaBoost && p.Method != forest.MethodLinear
			if done == total && bagged {
				j.Stage = "out-of-bag" // the out-of-bag pass and permutation importance follow
			}
		})
	}
	m, err := forest.Train(ctx, data.set, p)
	if err != nil {
		return trainResult{}, fmt.Errorf("copse_train %q: %w", c.name, err)
	}
	h.jobs.update(job, func(j *Job) { j.Stage = "saving" })
	types := make([]string, len(m.Features))
	for i, f := range m.Features {
		types[i] = data.featureTypes[f.Name]
	}
	e, err := h.saveModel(ctx, c.name, m, c.source, data.keys, data.keyNull, data.actuals, types)
	if err != nil {
		return trainResult{}, fmt.Errorf("copse_train %q: %w", c.name, err)
	}
	return trainResult{entry: e, skipped: data.skipped, seconds: time.Since(start).Seconds()}, nil
}

// checkLoss refuses, before any training, a loss that does not fit the target as it is
// trained: 'logistic' and 'multinomial' need classes, the others a numeric value. A
// target whose kind only the data tell is left to the engine, whose error names the
// loss too.
func (c *trainCall) checkLoss(l *layout, cols []srcColumn) error {
	if c.params.Method == forest.MethodAdaBoost && l.classify == 0 {
		t := cols[l.target]
		return fmt.Errorf("copse_train %q: method 'adaboost' classifies, and target %q (%s) is trained as regression; use task := 'classification' or method := 'boosting'",
			c.name, t.name, t.typ)
	}
	loss := c.params.Loss
	if loss == "" || l.classify < 0 {
		return nil
	}
	t := cols[l.target]
	classes := loss == forest.LossLogistic || loss == forest.LossMultinomial
	switch {
	case classes && l.classify == 0:
		return fmt.Errorf("copse_train %q: loss '%s' needs a class target, and target %q (%s) is trained as regression; use loss := 'squared' or task := 'classification'",
			c.name, loss, t.name, t.typ)
	case !classes && l.classify == 1:
		return fmt.Errorf("copse_train %q: loss '%s' needs a numeric target, and target %q (%s) is trained as classification; use loss := 'logistic' or 'multinomial'",
			c.name, loss, t.name, t.typ)
	}
	return nil
}

// Summary metric names of boosted models: the holdout loss at the kept round, by loss.
var holdoutMetric = map[forest.Loss]string{
	forest.LossSquared:     "holdout_mse",
	forest.LossLogistic:    "holdout_log_loss",
	forest.LossMultinomial: "holdout_log_loss",
	forest.LossAbsolute:    "holdout_mae",
	forest.LossHuber:       "holdout_huber",
	forest.LossQuantile:    "holdout_pinball",
	forest.LossPoisson:     "holdout_poisson_deviance",
}

// summaryMetric is the one metric copse_train's row and copse_models report: the first
// out-of-bag metric of a bagged model, the holdout loss at the best round of a boosted
// model trained with a holdout; ok is false when there is none.
func summaryMetric(m *forest.Model) (name string, value float64, ok bool) {
	if m.OOB != nil && len(m.OOB.Metrics) > 0 {
		return m.OOB.Metrics[0].Name, m.OOB.Metrics[0].Value, true
	}
	if b := m.Boost; b != nil && b.BestRound >= 1 && len(b.HoldoutLoss) >= b.BestRound {
		return holdoutMetric[b.Loss], b.HoldoutLoss[b.BestRound-1], true
	}
	if b := m.Blend; b != nil && b.Fitted != nil {
		return "holdout_" + b.Fitted.Metric, b.Fitted.Loss, true // learned weights: the loss they were fitted to
	}
	return "", 0, false
}

// setEntryHead writes the columns copse_train and copse_models share, in their order:
// model/name, version, method, task, target, rows.
func setEntryHead(out *duck.Chunk, k int, e Entry) {
	out.SetString(0, k, e.Name)
	out.SetInt64(1, k, int64(e.Version))
	out.SetString(2, k, e.Method)
	out.SetString(3, k, e.Task)
	out.SetString(4, k, e.Target)
	out.SetInt64(5, k, e.Rows)
}

// setOOB writes an entry's out-of-bag metric and value into columns col and col+1, NULL
// when the method has none.
func setOOB(out *duck.Chunk, col, k int, e Entry) {
	if e.OOBMetric == "" {
		out.SetNull(col, k)
		out.SetNull(col+1, k)
		return
	}
	out.SetString(col, k, e.OOBMetric)
	out.SetFloat64(col+1, k, e.OOBValue)
}

// onceRows is a fill that computes its rows on the first call (load returns how many)
// and then writes them chunk by chunk with put(out, chunk row, result row).
func onceRows(load func() (int, error), put func(out *duck.Chunk, k, i int)) duck.FillFunc {
	total, next := -1, 0
	return func(out *duck.Chunk) (int, error) {
		if total < 0 {
			n, err := load()
			if err != nil {
				return 0, err
			}
			total = n
		}
		k := 0
		for ; k < out.Capacity() && next < total; k, next = k+1, next+1 {
			put(out, k, next)
		}
		return k, nil
	}
}

// bindDrop checks the reference; the drop happens in the fill.
func (h *Host) bindDrop(call duck.TableCall) (*duck.TableBinding, error) {
	ref, ok := call.Args[0].(string)
	if !ok {
		return nil, fmt.Errorf("copse_drop: the model is NULL")
	}
	if _, err := parseRef(ref); err != nil {
		return nil, fmt.Errorf("copse_drop: %w", err)
	}
	connID := call.ConnID
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "model", Type: duck.Varchar}, {Name: "versions_dropped", Type: duck.BigInt}},
		Init: func() (duck.FillFunc, error) {
			var n int
			return onceRows(func() (int, error) {
				var err error
				n, err = h.dropModel(h.contextOf(connID), ref)
				if err != nil {
					return 0, fmt.Errorf("copse_drop: %w", err)
				}
				return 1, nil
			}, func(out *duck.Chunk, k, _ int) {
				out.SetString(0, k, ref)
				out.SetInt64(1, k, int64(n))
			}), nil
		},
	}, nil
}

// modelColumns are copse_models' columns, in Entry's order.
var modelColumns = []duck.Column{
	{Name: "name", Type: duck.Varchar}, {Name: "version", Type: duck.BigInt},
	{Name: "method", Type: duck.Varchar}, {Name: "task", Type: duck.Varchar},
	{Name: "target", Type: duck.Varchar}, {Name: "rows", Type: duck.BigInt},
	{Name: "features", Type: duck.BigInt}, {Name: "trees", Type: duck.BigInt},
	{Name: "oob_metric", Type: duck.Varchar}, {Name: "oob_value", Type: duck.Double},
	{Name: "created_at", Type: duck.Timestamp}, {Name: "size_bytes", Type: duck.BigInt},
	{Name: "source", Type: duck.Varchar},
}

// bindModels lists the catalog, read when the query runs.
func (h *Host) bindModels(call duck.TableCall) (*duck.TableBinding, error) {
	connID := call.ConnID
	return &duck.TableBinding{
		Columns: modelColumns,
		Init: func() (duck.FillFunc, error) {
			var list []Entry
			return onceRows(func() (int, error) {
				var err error
				list, err = h.listModels(h.contextOf(connID))
				if err != nil {
					return 0, fmt.Errorf("copse_models: %w", err)
				}
				return len(list), nil
			}, func(out *duck.Chunk, k, i int) {
				e := list[i]
				setEntryHead(out, k, e)
				out.SetInt64(6, k, int64(e.Features))
				out.SetInt64(7, k, int64(e.Trees))
				setOOB(out, 8, k, e)
				out.SetTime(10, k, e.CreatedAt)
				out.SetInt64(11, k, e.SizeBytes)
				out.SetString(12, k, e.Source)
			}), nil
		},
	}, nil
}

// bindJobs lists the trainings running when the query runs, on any connection.
func (h *Host) bindJobs(duck.TableCall) (*duck.TableBinding, error) {
	return &duck.TableBinding{
		Columns: []duck.Column{
			{Name: "id", Type: duck.BigInt}, {Name: "model", Type: duck.Varchar},
			{Name: "method", Type: duck.Varchar}, {Name: "stage", Type: duck.Varchar},
			{Name: "trees_done", Type: duck.BigInt}, {Name: "trees", Type: duck.BigInt},
			{Name: "seconds", Type: duck.Double},
		},
		Init: func() (duck.FillFunc, error) {
			var jobs []Job
			var now time.Time
			return onceRows(func() (int, error) {
				jobs, now = h.Jobs(), time.Now()
				return len(jobs), nil
			}, func(out *duck.Chunk, k, i int) {
				j := jobs[i]
				out.SetInt64(0, k, j.ID)
				out.SetString(1, k, j.Model)
				out.SetString(2, k, j.Method)
				out.SetString(3, k, j.Stage)
				out.SetInt64(4, k, int64(j.TreesDone))
				out.SetInt64(5, k, int64(j.Trees))
				out.SetFloat64(6, k, now.Sub(j.Started).Seconds())
			}), nil
		},
	}, nil
}
