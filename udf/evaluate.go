package udf

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/duckdb/duckdb-go/v2/mapping"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// Calibration bins: 10 by default (deciles of the probability scale, common practice);
// at most 1,000, which no table of rows needs more of.
const (
	defaultCalibrationBins = 10
	maxCalibrationBins     = 1000
)

// registerEvaluation registers copse_evaluate, copse_confusion, copse_roc,
// copse_calibration and copse_drift: table functions that score a labelled (or new)
// source with a stored model and return how well, or how differently, it does.
//
// The source is read as copse_train reads it (a table or view name, a table function
// call or a query) on a connection of its own, so it sees committed data only; each
// row is scored as copse_score scores it. Rows whose target is NULL are left out.
func (h *Host) registerEvaluation(conn *sql.Conn) error {
	src := []duck.Type{duck.Varchar, duck.Varchar}
	for _, f := range []duck.TableFunc{
		{Name: "copse_evaluate", Args: src, Bind: h.bindEvaluate},
		{Name: "copse_confusion", Args: src, Bind: h.bindConfusion},
		{Name: "copse_roc", Args: src, Bind: h.bindROC},
		{Name: "copse_calibration", Args: src, Named: []duck.Param{{Name: "bins", Type: duck.BigInt}}, Bind: h.bindCalibration},
		{Name: "copse_drift", Args: src, Bind: h.bindDrift},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return nil
}

// evalCall is one bound call of an evaluation function: the model, and the source
// with the columns it will be read by.
type evalCall struct {
	fn     string
	h      *Host
	m      *forest.Model
	e      Entry
	ctx    context.Context
	source string // as the user gave it
	query  string // the SELECT that reads it
	cols   []srcColumn
}

// label names the model in messages.
func (c *evalCall) label() string { return fmt.Sprintf("model %q (version %d)", c.e.Name, c.e.Version) }

// bindEvalSource loads the model and describes the source (DuckDB binds it without running
// it), so a bad name fails at bind.
func (h *Host) bindEvalSource(fn string, call duck.TableCall) (*evalCall, error) {
	m, e, ctx, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	src, ok := call.Args[1].(string)
	if !ok {
		return nil, fmt.Errorf("%s: %w: the source is NULL", fn, ErrCall)
	}
	c := &evalCall{fn: fn, h: h, m: m, e: e, ctx: ctx, source: src}
	if c.query, err = sourceQuery(src); err != nil {
		return nil, fmt.Errorf("%s: %w: %w", fn, ErrCall, err)
	}
	if c.cols, err = h.describeQuery(ctx, c.query); err != nil {
		return nil, c.sourceErr(err)
	}
	return c, nil
}

// sourceErr reports a failure of the source query in DuckDB's words, without the caret
// (it points into the query built around the source).
func (c *evalCall) sourceErr(err error) error {
	msg := strings.TrimPrefix(err.Error(), "duck: read: ")
	if i := strings.Index(msg, "\n\nLINE "); i >= 0 {
		msg = msg[:i]
	}
	msg = strings.TrimSpace(msg)
	if strings.Contains(msg, "Catalog Error") {
		msg += "\n(" + strings.Replace(hintCommitted, "copse_train reads", c.fn+" reads", 1) + ")"
	}
	return fmt.Errorf("%s: %s: source %q: %s", c.fn, c.label(), c.source, msg)
}

// column finds a source column by name: exactly, else ignoring case (as DuckDB resolves
// names).
func (c *evalCall) column(name string) (srcColumn, bool) {
	for _, col := range c.cols {
		if col.name == name {
			return col, true
		}
	}
	for _, col := range c.cols {
		if strings.EqualFold(col.name, name) {
			return col, true
		}
	}
	return srcColumn{}, false
}

// targetColumn is the source column holding the model's target, or an error naming it.
func (c *evalCall) targetColumn() (srcColumn, error) {
	col, ok := c.column(c.m.Target)
	if !ok {
		return srcColumn{}, fmt.Errorf("%s: %s: source %q lacks the target column %q that the model was trained on (columns: %s)",
			c.fn, c.label(), c.source, c.m.Target, columnList(c.cols))
	}
	return col, nil
}

// needClasses refuses a regression model, and with two set a model of more classes.
func (c *evalCall) needClasses(two bool) error {
	want := "a classification model"
	if two {
		want = "a classification model of two classes"
	}
	switch {
	case c.m.Task != forest.Classification:
		return fmt.Errorf("%s: %s is a regression model (target %q); %s needs %s", c.fn, c.label(), c.m.Target, c.fn, want)
	case two && len(c.m.Classes) != 2:
		return fmt.Errorf("%s: %s has %d classes (%s); %s needs a model of two classes", c.fn, c.label(), len(c.m.Classes), quotedList(c.m.Classes), c.fn)
	}
	return nil
}

// labelled is a source scored by the model, with its known outcomes.
type labelled struct {
	rows   int
	probs  []float64 // classification: Width probabilities per row, in class order
	class  []int32   // classification: actual class codes
	pred   []float64 // regression: predictions
	actual []float64 // regression: actual values
}

// modelRef is the pinned model reference the read query scores with, as a SQL literal.
func (c *evalCall) modelRef() string {
	return "'" + sqlEscape(fmt.Sprintf("%s@%d", c.e.Name, c.e.Version)) + "'"
}

// readLabelled reads the source's target and the model's scores of each row: one
// copse_score per class (classification) or the value. Rows whose target is NULL (or
// whose score is NULL: a Poisson model's exposure) are left out.
func (c *evalCall) readLabelled() (*labelled, error) {
	tcol, err := c.targetColumn()
	if err != nil {
		return nil, err
	}
	m := c.m
	var b strings.Builder
	b.WriteString("SELECT ")
	if m.Task == forest.Classification {
		for _, cl := range m.Classes {
			b.WriteString("copse_score(" + c.modelRef() + ", " + predictAlias + ", '" + sqlEscape(cl) + "'), ")
		}
	} else {
		b.WriteString("copse_score(" + c.modelRef() + ", " + predictAlias + "), ")
	}
	b.WriteString(predictAlias + "." + quoteIdent(tcol.name) + " FROM (\n" + c.query + "\n) AS " + predictAlias)
	res, err := duck.ReadColumns(c.ctx, c.h.db, b.String(), duck.ReadOptions{})
	if err != nil {
		if c.ctx.Err() != nil {
			return nil, fmt.Errorf("%s: %w", c.fn, err)
		}
		return nil, c.sourceErr(err)
	}
	if len(res) < 2 {
		return nil, fmt.Errorf("%s: %s: source %q: read %d columns", c.fn, c.label(), c.source, len(res))
	}
	target := &res[len(res)-1]
	scores := res[:len(res)-1]
	n := max(len(target.Values), len(target.Codes))
	out := &labelled{}
	if m.Task != forest.Classification {
		if target.Codes != nil {
			return nil, fmt.Errorf("%s: %s: target %q is %v in the source; the model predicts numbers: cast it to a number",
				c.fn, c.label(), tcol.name, target.Type)
		}
		for i, y := range target.Values {
			p := scores[0].Values[i]
			if math.IsNaN(y) || math.IsNaN(p) {
				continue
			}
			out.actual = append(out.actual, y)
			out.pred = append(out.pred, p)
		}
		out.rows = len(out.actual)
	} else {
		K := len(m.Classes)
		classOf, err := c.classCodes(target, tcol.name)
		if err != nil {
			return nil, err
		}
	rows:
		for i := range n {
			a := classOf(i)
			if a == -1 {
				continue
			}
			if a < -1 {
				return nil, fmt.Errorf("%s: %s: target %q holds %s, which is not one of the model's classes (%s)",
					c.fn, c.label(), tcol.name, targetText(target, i), quotedList(m.Classes))
			}
			for k := range K {
				if math.IsNaN(scores[k].Values[i]) {
					continue rows
				}
			}
			for k := range K {
				out.probs = append(out.probs, scores[k].Values[i])
			}
			out.class = append(out.class, a)
		}
		out.rows = len(out.class)
	}
	if out.rows == 0 {
		return nil, fmt.Errorf("%s: %s: source %q has no row with a target %q to evaluate", c.fn, c.label(), c.source, tcol.name)
	}
	return out, nil
}

// classCodes returns a function giving each row's class code: −1 for NULL, −2 for a
// value that names no class. Text and ENUM targets match class names; numeric and
// BOOLEAN ones are written as copse_train writes them ("1", "2.5", "true").
func (c *evalCall) classCodes(target *duck.ResultColumn, name string) (func(i int) int32, error) {
	code := make(map[string]int32, len(c.m.Classes))
	for k, cl := range c.m.Classes {
		code[cl] = int32(k)
	}
	if target.Codes != nil {
		byLevel := make([]int32, len(target.Levels))
		for l, s := range target.Levels {
			byLevel[l] = -2
			if k, ok := code[s]; ok {
				byLevel[l] = k
			}
		}
		return func(i int) int32 {
			if l := target.Codes[i]; l >= 0 {
				return byLevel[l]
			}
			return -1
		}, nil
	}
	boolean := target.Type.ID == mapping.TypeBoolean
	return func(i int) int32 {
		v := target.Values[i]
		if math.IsNaN(v) {
			return -1
		}
		if k, ok := code[numberLabel(v, boolean)]; ok {
			return k
		}
		return -2
	}, nil
}

// targetText spells row i's target value for a message.
func targetText(col *duck.ResultColumn, i int) string {
	if col.Codes != nil {
		return "'" + sqlEscape(col.Levels[col.Codes[i]]) + "'"
	}
	return numberLabel(col.Values[i], col.Type.ID == mapping.TypeBoolean)
}

// evalErr wraps an engine error with the call's context.
func (c *evalCall) evalErr(err error) error {
	if errors.Is(err, forest.ErrEvaluate) {
		return fmt.Errorf("%s: %s on source %q: %w", c.fn, c.label(), c.source, err)
	}
	return fmt.Errorf("%s: %w", c.fn, err)
}

// bindEvaluate: copse_evaluate(model, source) → metric (VARCHAR), value (DOUBLE).
//
//	classification: error, accuracy, balanced_accuracy, precision, recall, f1, auc,
//	                log_loss, brier (forest.ClassEvaluation says how each is computed:
//	                with two classes, of the second, positive class; with more, macro
//	                averages and one-vs-rest AUC)
//	regression:     mse, rmse, mae, r2, and poisson_deviance when every target is ≥ 0
//	                and every prediction > 0
//	both:           rows, the number of rows evaluated (those with a target)
//
// A metric that is undefined on the source (AUC with one class present) is NULL.
func (h *Host) bindEvaluate(call duck.TableCall) (*duck.TableBinding, error) {
	c, err := h.bindEvalSource("copse_evaluate", call)
	if err != nil {
		return nil, err
	}
	if _, err := c.targetColumn(); err != nil {
		return nil, err
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "metric", Type: duck.Varchar}, {Name: "value", Type: duck.Double}},
		Init: func() (duck.FillFunc, error) {
			l, err := c.readLabelled()
			if err != nil {
				return nil, err
			}
			var ms []forest.Metric
			if c.m.Task == forest.Classification {
				ev, err := forest.EvaluateClassification(l.class, l.probs, len(c.m.Classes), nil)
				if err != nil {
					return nil, c.evalErr(err)
				}
				ms = ev.Metrics
			} else if ms, err = forest.EvaluateRegression(l.actual, l.pred, nil); err != nil {
				return nil, c.evalErr(err)
			}
			ms = append(ms, forest.Metric{Name: "rows", Value: float64(l.rows)})
			return rowsFill(len(ms), func(out *duck.Chunk, j, r int) {
				out.SetString(0, j, ms[r].Name)
				setFloat(out, 1, j, ms[r].Value)
			}), nil
		},
	}, nil
}

// bindConfusion: copse_confusion(model, source) → actual, predicted (VARCHAR class
// names), rows (BIGINT): every pair of classes in class order, zeros included, the
// predicted class being the most probable one (as copse_label gives it).
func (h *Host) bindConfusion(call duck.TableCall) (*duck.TableBinding, error) {
	c, err := h.bindEvalSource("copse_confusion", call)
	if err != nil {
		return nil, err
	}
	if err := c.needClasses(false); err != nil {
		return nil, err
	}
	if _, err := c.targetColumn(); err != nil {
		return nil, err
	}
	K := len(c.m.Classes)
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "actual", Type: duck.Varchar}, {Name: "predicted", Type: duck.Varchar}, {Name: "rows", Type: duck.BigInt}},
		Init: func() (duck.FillFunc, error) {
			l, err := c.readLabelled()
			if err != nil {
				return nil, err
			}
			ev, err := forest.EvaluateClassification(l.class, l.probs, K, nil)
			if err != nil {
				return nil, c.evalErr(err)
			}
			return rowsFill(K*K, func(out *duck.Chunk, j, r int) {
				out.SetString(0, j, c.m.Classes[r/K])
				out.SetString(1, j, c.m.Classes[r%K])
				out.SetInt64(2, j, int64(ev.Confusion[r])) // unweighted: whole counts
			}), nil
		},
	}, nil
}

// positives returns the positive-class probability and outcome of each row.
func (l *labelled) positives() ([]float64, []bool) {
	score := make([]float64, l.rows)
	pos := make([]bool, l.rows)
	for i, a := range l.class {
		score[i], pos[i] = l.probs[2*i+1], a == 1
	}
	return score, pos
}

// bindROC: copse_roc(model, source) → threshold, true_positive_rate,
// false_positive_rate (DOUBLE): the ROC curve of the positive (second) class's
// probability for a model of two classes; rows scoring at least threshold are called
// positive. The first row has threshold +Inf (nothing called positive: rates 0, 0);
// then one row per distinct score, highest first, so tied rows enter together.
func (h *Host) bindROC(call duck.TableCall) (*duck.TableBinding, error) {
	c, err := h.bindEvalSource("copse_roc", call)
	if err != nil {
		return nil, err
	}
	if err := c.needClasses(true); err != nil {
		return nil, err
	}
	if _, err := c.targetColumn(); err != nil {
		return nil, err
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "threshold", Type: duck.Double}, {Name: "true_positive_rate", Type: duck.Double},
			{Name: "false_positive_rate", Type: duck.Double}},
		Init: func() (duck.FillFunc, error) {
			l, err := c.readLabelled()
			if err != nil {
				return nil, err
			}
			score, pos := l.positives()
			roc, err := forest.ROC(score, pos, nil)
			if err != nil {
				return nil, c.evalErr(err)
			}
			return rowsFill(len(roc), func(out *duck.Chunk, j, r int) {
				out.SetFloat64(0, j, roc[r].Threshold)
				out.SetFloat64(1, j, roc[r].TruePositiveRate)
				out.SetFloat64(2, j, roc[r].FalsePositiveRate)
			}), nil
		},
	}, nil
}

// bindCalibration: copse_calibration(model, source, bins := 10) → bin (BIGINT, 1…bins),
// mean_predicted, observed_rate (DOUBLE), rows (BIGINT). The probability scale [0, 1] is
// cut into bins of equal width (bin b holds (b−1)/bins < p ≤ b/bins; bin 1 includes 0);
// every bin is listed, an empty one with rows 0 and NULL means. With two classes p is
// the positive class's probability and observed_rate the share of positive rows; with
// more, p is the probability of the predicted class and observed_rate the share of rows
// where that class is right (confidence calibration: Guo, Pleiss, Sun & Weinberger,
// ICML 2017).
func (h *Host) bindCalibration(call duck.TableCall) (*duck.TableBinding, error) {
	c, err := h.bindEvalSource("copse_calibration", call)
	if err != nil {
		return nil, err
	}
	bins := int64(defaultCalibrationBins)
	if v, ok := call.Named["bins"]; ok {
		b, ok := v.(int64)
		if !ok || b < 1 || b > maxCalibrationBins {
			return nil, fmt.Errorf("%s: %w: bins := %v; want a whole number from 1 to %d", c.fn, ErrCall, v, maxCalibrationBins)
		}
		bins = b
	}
	if err := c.needClasses(false); err != nil {
		return nil, err
	}
	if _, err := c.targetColumn(); err != nil {
		return nil, err
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "bin", Type: duck.BigInt}, {Name: "mean_predicted", Type: duck.Double},
			{Name: "observed_rate", Type: duck.Double}, {Name: "rows", Type: duck.BigInt}},
		Init: func() (duck.FillFunc, error) {
			l, err := c.readLabelled()
			if err != nil {
				return nil, err
			}
			var score []float64
			var hit []bool
			if K := len(c.m.Classes); K == 2 {
				score, hit = l.positives()
			} else {
				score, hit = make([]float64, l.rows), make([]bool, l.rows)
				for i, a := range l.class {
					p := l.probs[i*K : (i+1)*K]
					k := forest.Class(p)
					score[i], hit[i] = p[k], int32(k) == a
				}
			}
			cal, err := forest.Calibration(score, hit, nil, int(bins))
			if err != nil {
				return nil, c.evalErr(err)
			}
			return rowsFill(len(cal), func(out *duck.Chunk, j, r int) {
				out.SetInt64(0, j, int64(cal[r].Bin))
				setFloat(out, 1, j, cal[r].MeanPredicted)
				setFloat(out, 2, j, cal[r].ObservedRate)
				out.SetInt64(3, j, int64(cal[r].Rows))
			}), nil
		},
	}, nil
}
