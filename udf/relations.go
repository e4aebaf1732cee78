package udf

import (
	"cmp"
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// ErrNoOOB is wrapped when a relation needs out-of-bag results the model lacks: a single
// tree trains on every row, so no row is out of its bag.
var ErrNoOOB = errors.New("model has no out-of-bag results")

// registerRelations registers copse_importance, copse_oob, copse_curve and
// copse_coefficients: table functions over what a model stores, so they can be joined and filtered in SQL.
func (h *Host) registerRelations(conn *sql.Conn) error {
	for _, f := range []duck.TableFunc{
		{Name: "copse_importance", Args: []duck.Type{duck.Varchar},
			Named: []duck.Param{{Name: "method", Type: duck.Varchar}}, Bind: h.bindImportance},
		{Name: "copse_oob", Args: []duck.Type{duck.Varchar}, Bind: h.bindOOB},
		{Name: "copse_curve", Args: []duck.Type{duck.Varchar}, Bind: h.bindCurve},
		{Name: "copse_coefficients", Args: []duck.Type{duck.Varchar}, Bind: h.bindCoefficients},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return nil
}

// relationModel loads the model a table function's first argument names.
func (h *Host) relationModel(fn string, call duck.TableCall) (*forest.Model, Entry, context.Context, error) {
	ref, ok := call.Args[0].(string)
	if !ok {
		return nil, Entry{}, nil, fmt.Errorf("%s: %w: the model name is NULL", fn, ErrCall)
	}
	ctx := h.contextOf(call.ConnID)
	m, e, err := h.loadModel(ctx, ref)
	if err != nil {
		return nil, Entry{}, nil, fmt.Errorf("%s: %w", fn, err)
	}
	return m, e, ctx, nil
}

// rowsFill returns a fill function that writes rows 0…n-1 through set, a chunk at a time.
func rowsFill(n int, set func(out *duck.Chunk, j, row int)) duck.FillFunc {
	next := 0
	return func(out *duck.Chunk) (int, error) {
		k := min(out.Capacity(), n-next)
		for j := range k {
			set(out, j, next+j)
		}
		next += k
		return k, nil
	}
}

// setFloat writes v, or NULL for NaN (no value).
func setFloat(out *duck.Chunk, col, j int, v float64) {
	if math.IsNaN(v) {
		out.SetNull(col, j)
		return
	}
	out.SetFloat64(col, j, v)
}

// bindImportance: copse_importance(model, method := 'impurity' | 'permutation') →
// feature, importance, std (NULL for impurity), rank (1 = most important; ties keep
// feature order), most important first.
func (h *Host) bindImportance(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_importance"
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	kind := forest.ImpurityImportance
	if v, ok := call.Named["method"]; ok {
		s, _ := v.(string)
		kind = forest.ImportanceKind(strings.ToLower(s)) // as copse_train's method and task
	}
	if m.Linear != nil {
		return nil, fmt.Errorf("%s: model %q (version %d), method linear, has no feature importance: a linear model is explained by its coefficients; use copse_coefficients('%s')",
			fn, e.Name, e.Version, sqlEscape(e.Name))
	}
	if m.Blend != nil {
		return nil, fmt.Errorf("%s: model %q (version %d), method blend, has no feature importance of its own: see its members with copse_members('%s')",
			fn, e.Name, e.Version, sqlEscape(e.Name))
	}
	var imp, std []float64
	switch kind {
	case forest.ImpurityImportance:
		imp = m.Importance.Impurity
	case forest.PermutationImportance:
		imp, std = m.Importance.Permutation, m.Importance.PermutationStd
		if imp == nil {
			why := "it was trained without it"
			switch m.Method {
			case forest.MethodTree:
				why = "a single tree has no out-of-bag rows to permute"
			case forest.MethodBoosting, forest.MethodAdaBoost:
				why = "boosting has no out-of-bag rows to permute"
			}
			return nil, fmt.Errorf("%s: model %q (version %d) has no permutation importance: %s; use method := 'impurity'", fn, e.Name, e.Version, why)
		}
	default:
		return nil, fmt.Errorf("%s: %w: method '%s': want 'impurity' or 'permutation'", fn, ErrCall, sqlEscape(string(kind)))
	}
	if len(imp) != len(m.Features) {
		return nil, fmt.Errorf("%s: model %q (version %d): %d importances for %d features", fn, e.Name, e.Version, len(imp), len(m.Features))
	}
	order := make([]int, len(imp))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int { return cmp.Compare(imp[b], imp[a]) })
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "feature", Type: duck.Varchar}, {Name: "importance", Type: duck.Double},
			{Name: "std", Type: duck.Double}, {Name: "rank", Type: duck.BigInt}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(len(order), func(out *duck.Chunk, j, r int) {
				f := order[r]
				out.SetString(0, j, m.Features[f].Name)
				setFloat(out, 1, j, imp[f])
				if std == nil {
					out.SetNull(2, j)
				} else {
					setFloat(out, 2, j, std[f])
				}
				out.SetInt64(3, j, int64(r+1))
			}), nil
		},
	}, nil
}

// noOOB is the error for a model without out-of-bag results.
func noOOB(fn string, m *forest.Model, e Entry) error {
	why := "a single tree sees every row; train a forest or bagging"
	if m.Method == forest.MethodAdaBoost {
		why = "each AdaBoost tree is grown on every training row, reweighted, so no row is out of a bag"
	}
	if m.Method == forest.MethodBoosting {
		why = "each boosted tree fits what the trees before it left unexplained on every training row, so no row is out of a bag; " +
			"train with holdout_fraction := 0.2 (say) for a holdout loss in copse_train's row and copse_curve"
	}
	return fmt.Errorf("%s: model %q (version %d), method %s: %w (%s)", fn, e.Name, e.Version, m.Method, ErrNoOOB, why)
}

// bindOOB: copse_oob(model) → one row per training row, in training order:
//
//	key           the key column's value (VARCHAR) when the model was trained with key :=,
//	              else the row number 1…n (BIGINT)
//	actual        the training target (VARCHAR class or DOUBLE value); NULL for models
//	              saved without it
//	classification: predicted (VARCHAR, the most probable class), probability (DOUBLE:
//	              of the positive class for two classes, of the predicted class otherwise)
//	regression:   value (DOUBLE, the out-of-bag mean)
//	trees_voting  BIGINT, how many trees left the row out; 0 gives NULL predictions
func (h *Host) bindOOB(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_oob"
	m, e, ctx, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	o := m.OOB
	if o == nil {
		return nil, noOOB(fn, m, e)
	}
	keyed, err := h.hasRowKeys(ctx, e)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", fn, err)
	}
	classify := m.Task == forest.Classification
	cols := []duck.Column{{Name: "key", Type: duck.BigInt}, {Name: "actual", Type: duck.Double}}
	if keyed {
		cols[0].Type = duck.Varchar
	}
	if classify {
		cols[1].Type = duck.Varchar
		cols = append(cols, duck.Column{Name: "predicted", Type: duck.Varchar}, duck.Column{Name: "probability", Type: duck.Double})
	} else {
		cols = append(cols, duck.Column{Name: "value", Type: duck.Double})
	}
	cols = append(cols, duck.Column{Name: "trees_voting", Type: duck.BigInt})
	W := m.Width()
	n := len(o.Votes)
	return &duck.TableBinding{
		Columns: cols,
		Init: func() (duck.FillFunc, error) {
			var keys []string
			var keyNull []bool
			if keyed {
				var err error
				if keys, keyNull, err = h.rowTextsNull(ctx, e, "row_keys"); err != nil {
					return nil, fmt.Errorf("%s: %w", fn, err)
				}
				if len(keys) != n {
					return nil, fmt.Errorf("%s: model %q (version %d): %d keys for %d training rows", fn, e.Name, e.Version, len(keys), n)
				}
			}
			actuals, err := h.rowActuals(ctx, e)
			if err != nil {
				return nil, fmt.Errorf("%s: %w", fn, err)
			}
			if actuals != nil && len(actuals) != n {
				return nil, fmt.Errorf("%s: model %q (version %d): %d target values for %d training rows", fn, e.Name, e.Version, len(actuals), n)
			}
			return rowsFill(n, func(out *duck.Chunk, j, i int) {
				if keyed {
					if keyNull != nil && keyNull[i] {
						out.SetNull(0, j)
					} else {
						out.SetString(0, j, keys[i])
					}
				} else {
					out.SetInt64(0, j, int64(i+1))
				}
				switch {
				case actuals == nil:
					out.SetNull(1, j)
				case classify:
					out.SetString(1, j, actuals[i])
				default:
					v, err := strconv.ParseFloat(actuals[i], 64)
					if err != nil {
						out.SetNull(1, j)
					} else {
						out.SetFloat64(1, j, v)
					}
				}
				votes := o.Votes[i]
				pred := o.Value[i*W : (i+1)*W]
				c := 2
				if classify {
					if votes == 0 {
						out.SetNull(c, j)
						out.SetNull(c+1, j)
					} else {
						k := forest.Class(pred)
						p := pred[k]
						if W == 2 {
							p = pred[1]
						}
						out.SetString(c, j, m.Classes[k])
						out.SetFloat64(c+1, j, p)
					}
					c += 2
				} else {
					setFloat(out, c, j, pred[0])
					c++
				}
				out.SetInt64(c, j, int64(votes))
			}), nil
		},
	}, nil
}

// hasRowKeys reports whether the catalog holds training keys for a version, without
// reading them (bind stays cheap).
func (h *Host) hasRowKeys(ctx context.Context, e Entry) (bool, error) {
	var keyed bool
	err := h.db.QueryRowContext(ctx, `SELECT row_keys IS NOT NULL FROM `+catalogTable+` WHERE name = ? AND version = ?`,
		e.Name, e.Version).Scan(&keyed)
	if err != nil {
		return false, fmt.Errorf("read keys of %s@%d: %w", e.Name, e.Version, err)
	}
	return keyed, nil
}

// bindCurve: copse_curve(model) → trees (BIGINT, 1…B), metric (VARCHAR: 'error' for
// classification, 'mse' for regression), value (DOUBLE, the out-of-bag metric of the
// first trees; NULL while no row has a vote). For a boosted model, trees is the round
// (1…every round trained, also those past the kept best round) with metric 'train_loss'
// and, when it was trained with a holdout, 'holdout_loss' next: the loss after that
// round, mean squared error (loss 'squared') or mean log loss (loss 'logistic'). For an
// AdaBoost model, trees is the round with metric 'weighted_error' (ε, the round's tree's
// weighted training error under that round's row weights) and then 'alpha' (α, its vote
// weight).
func (h *Host) bindCurve(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_curve"
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	if b := m.Boost; b != nil {
		return boostCurve(fn, b, e)
	}
	if a := m.AdaBoost; a != nil {
		return adaBoostCurve(fn, a, e)
	}
	if m.OOB == nil {
		return nil, noOOB(fn, m, e)
	}
	curve, metric := m.OOB.Curve, m.OOB.CurveMetric
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "trees", Type: duck.BigInt}, {Name: "metric", Type: duck.Varchar}, {Name: "value", Type: duck.Double}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(len(curve), func(out *duck.Chunk, j, b int) {
				out.SetInt64(0, j, int64(b+1))
				out.SetString(1, j, metric)
				setFloat(out, 2, j, curve[b])
			}), nil
		},
	}, nil
}

// Metrics of a boosted model's curve.
const (
	curveTrainLoss   = "train_loss"
	curveHoldoutLoss = "holdout_loss"
)

// boostCurve is copse_curve's rows for a boosted model: per round, its training loss and
// then its holdout loss (when there is a holdout).
func boostCurve(fn string, b *forest.Boost, e Entry) (*duck.TableBinding, error) {
	per := 1
	if b.HoldoutLoss != nil {
		per = 2
		if len(b.HoldoutLoss) != len(b.TrainLoss) {
			return nil, fmt.Errorf("%s: model %q (version %d): %d holdout losses for %d rounds", fn, e.Name, e.Version, len(b.HoldoutLoss), len(b.TrainLoss))
		}
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "trees", Type: duck.BigInt}, {Name: "metric", Type: duck.Varchar}, {Name: "value", Type: duck.Double}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(per*len(b.TrainLoss), func(out *duck.Chunk, j, i int) {
				r := i / per
				out.SetInt64(0, j, int64(r+1))
				if i%per == 0 {
					out.SetString(1, j, curveTrainLoss)
					setFloat(out, 2, j, b.TrainLoss[r])
				} else {
					out.SetString(1, j, curveHoldoutLoss)
					setFloat(out, 2, j, b.HoldoutLoss[r])
				}
			}), nil
		},
	}, nil
}

// Metrics of an AdaBoost model's curve.
const (
	curveWeightedError = "weighted_error"
	curveAlpha         = "alpha"
)

// adaBoostCurve is copse_curve's rows for an AdaBoost model: per round, its tree's
// weighted training error and then its α.
func adaBoostCurve(fn string, a *forest.AdaBoost, e Entry) (*duck.TableBinding, error) {
	if len(a.Error) != len(a.Alpha) {
		return nil, fmt.Errorf("%s: model %q (version %d): %d errors for %d rounds", fn, e.Name, e.Version, len(a.Error), len(a.Alpha))
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "trees", Type: duck.BigInt}, {Name: "metric", Type: duck.Varchar}, {Name: "value", Type: duck.Double}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(2*len(a.Alpha), func(out *duck.Chunk, j, i int) {
				r := i / 2
				out.SetInt64(0, j, int64(r+1))
				if i%2 == 0 {
					out.SetString(1, j, curveWeightedError)
					setFloat(out, 2, j, a.Error[r])
				} else {
					out.SetString(1, j, curveAlpha)
					setFloat(out, 2, j, a.Alpha[r])
				}
			}), nil
		},
	}, nil
}

// bindCoefficients: copse_coefficients(model) → term, estimate, std_error, z, p_value: one
// row per term of a linear model, in the model's order (the intercept first). z is t for
// least squares; std_error, z and p_value are NULL for a ridge fit.
func (h *Host) bindCoefficients(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_coefficients"
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	l := m.Linear
	if l == nil {
		return nil, fmt.Errorf("%s: model %q (version %d), method %s, has no coefficients: only method := 'linear' fits them; use copse_importance",
			fn, e.Name, e.Version, m.Method)
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "term", Type: duck.Varchar}, {Name: "estimate", Type: duck.Double},
			{Name: "std_error", Type: duck.Double}, {Name: "z", Type: duck.Double}, {Name: "p_value", Type: duck.Double}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(len(l.Terms), func(out *duck.Chunk, j, r int) {
				t := &l.Terms[r]
				out.SetString(0, j, t.Name)
				setFloat(out, 1, j, t.Estimate)
				setFloat(out, 2, j, t.StdError)
				setFloat(out, 3, j, t.Z)
				setFloat(out, 4, j, t.PValue)
			}), nil
		},
	}, nil
}
