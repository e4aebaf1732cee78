package udf

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// copse_crossval and copse_tune read a source as copse_train does and take every
// copse_train option; their own options come on top.
var (
	crossvalOptions = append(slices.Clone(trainOptions), duck.Param{Name: "folds", Type: duck.Double})
	tuneOptions     = append(slices.Clone(trainOptions),
		duck.Param{Name: "grid", Type: duck.Varchar}, duck.Param{Name: "folds", Type: duck.Double},
		duck.Param{Name: "metric", Type: duck.Varchar})
)

// defaultFolds is copse_crossval's fold count: five folds is common practice, a fair
// trade between the bias of small training sets and the cost of many trainings.
const defaultFolds = 5

// registerValidation registers copse_crossval and copse_tune.
func (h *Host) registerValidation(conn *sql.Conn) error {
	for _, f := range []duck.TableFunc{
		{Name: "copse_crossval", Args: []duck.Type{duck.Varchar}, Named: crossvalOptions, Bind: h.bindCrossval},
		{Name: "copse_tune", Args: []duck.Type{duck.Varchar, duck.Varchar}, Named: tuneOptions, Bind: h.bindTune},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return nil
}

// renamedErr is an error of copse_train's shared parsing or reading with its
// "copse_train "name"" prefix replaced by the calling function's; it still unwraps to
// the original.
type renamedErr struct {
	msg string
	err error
}

func (e *renamedErr) Error() string { return e.msg }
func (e *renamedErr) Unwrap() error { return e.err }

// rename replaces the prefix `copse_train "name"` of err's text with to.
func rename(err error, name, to string) error {
	if err == nil {
		return nil
	}
	from := fmt.Sprintf("copse_train %q", name)
	msg := err.Error()
	if !strings.HasPrefix(msg, from) {
		return fmt.Errorf("%s: %w", to, err)
	}
	return &renamedErr{msg: to + strings.TrimPrefix(msg, from), err: err}
}

// without returns named minus the given options, for copse_train's parser.
func without(named map[string]any, opts ...string) map[string]any {
	out := make(map[string]any, len(named))
	for k, v := range named {
		if !slices.Contains(opts, k) {
			out[k] = v
		}
	}
	return out
}

// foldsOption reads folds := k (a whole number ≥ 2, or 0 where allowZero), or def when
// it is not given.
func foldsOption(fn string, named map[string]any, def int, allowZero bool) (int, error) {
	v, ok := named["folds"].(float64)
	switch {
	case !ok:
		return def, nil
	case allowZero && v == 0:
		return 0, nil
	case v == math.Trunc(v) && v >= 2 && v <= maxWhole:
		return int(v), nil
	case allowZero:
		return 0, fmt.Errorf("%s: folds %v: want 0 (out-of-bag) or a whole number ≥ 2", fn, v)
	}
	return 0, fmt.Errorf("%s: folds %v: want a whole number ≥ 2", fn, v)
}

// checkTrainSource describes the source of a parsed call and checks its columns and loss, as
// copse_train's bind does: bad input fails before any work.
func (h *Host) checkTrainSource(ctx context.Context, c *trainCall) error {
	cols, err := h.describe(ctx, c)
	if err != nil {
		return err
	}
	l, err := c.resolve(cols)
	if err != nil {
		return err
	}
	return c.checkLoss(l, cols)
}

// cvRow is one row of copse_crossval: a fold's metric, or (fold 0) a summary.
type cvRow struct {
	fold    int    // 1…k; 0 on summary rows
	summary string // "mean" or "std" on summary rows
	metric  string
	value   float64
	rows    int
}

// bindCrossval: copse_crossval(source, target := …, folds := 5, <copse_train options>) →
// fold (BIGINT; NULL on summary rows), summary (VARCHAR: NULL on fold rows, 'mean' or
// 'std'), metric, value, rows (held-out rows of the fold; NULL on summary rows).
//
// The rows are split by [forest.Folds] (stratified by class, seeded by seed :=); each
// fold's model is trained on the other folds with the given options and scored on the
// fold with [forest.HeldOut]. The mean and sample standard deviation over the folds
// follow. Nothing is stored in the catalog.
func (h *Host) bindCrossval(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_crossval"
	c, err := parseTrainCall([]any{fn, call.Args[0]}, without(call.Named, "folds"))
	if err != nil {
		return nil, rename(err, fn, fn)
	}
	k, err := foldsOption(fn, call.Named, defaultFolds, false)
	if err != nil {
		return nil, err
	}
	if err := h.checkTrainSource(h.contextOf(call.ConnID), c); err != nil {
		return nil, rename(err, fn, fn)
	}
	connID := call.ConnID
	return &duck.TableBinding{
		Columns: []duck.Column{
			{Name: "fold", Type: duck.BigInt}, {Name: "summary", Type: duck.Varchar},
			{Name: "metric", Type: duck.Varchar}, {Name: "value", Type: duck.Double},
			{Name: "rows", Type: duck.BigInt},
		},
		Init: func() (duck.FillFunc, error) {
			var rows []cvRow
			return onceRows(func() (int, error) {
				var err error
				rows, err = h.crossval(h.contextOf(connID), c, k)
				return len(rows), rename(err, fn, fn)
			}, func(out *duck.Chunk, j, i int) {
				r := rows[i]
				if r.fold == 0 {
					out.SetNull(0, j)
					out.SetString(1, j, r.summary)
					out.SetNull(4, j)
				} else {
					out.SetInt64(0, j, int64(r.fold))
					out.SetNull(1, j)
					out.SetInt64(4, j, int64(r.rows))
				}
				out.SetString(2, j, r.metric)
				setFloat(out, 3, j, r.value)
			}), nil
		},
	}, nil
}

// crossval reads the source and cross-validates c's options over k folds.
func (h *Host) crossval(ctx context.Context, c *trainCall, k int) ([]cvRow, error) {
	trees := c.params.Trees
	job := h.jobs.start(c.name, string(c.params.Method), trees*k)
	defer h.jobs.finish(job)
	data, err := h.readTraining(ctx, c)
	if err != nil {
		return nil, err
	}
	folds, err := forest.Folds(data.set, k, c.params.Seed)
	if err != nil {
		return nil, fmt.Errorf("copse_train %q: %w", c.name, err)
	}
	h.jobs.update(job, func(j *Job) { j.Stage = "training" })
	p := c.params
	p.PermutationRows = -1 // importance is not reported, and it does not change predictions
	per, err := forest.CrossValidate(ctx, data.set, p, folds, func(fold, done, total int) {
		h.jobs.update(job, func(j *Job) { j.TreesDone, j.Trees = fold*total+done, k*total })
	})
	if err != nil {
		return nil, fmt.Errorf("copse_train %q: %w", c.name, err)
	}
	var out []cvRow
	for i, ms := range per {
		for _, m := range ms {
			out = append(out, cvRow{fold: i + 1, metric: m.Name, value: m.Value, rows: len(folds[i])})
		}
	}
	mean, std := forest.Summarize(per)
	for _, s := range []struct {
		name string
		ms   []forest.Metric
	}{{"mean", mean}, {"std", std}} {
		for _, m := range s.ms {
			out = append(out, cvRow{summary: s.name, metric: m.Name, value: m.Value})
		}
	}
	return out, nil
}
