package udf

import (
	"fmt"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// driftScoreRow is the feature column's value on copse_drift's row for the model's own
// score; the parentheses keep it apart from any column name a source is likely to have.
const driftScoreRow = "(score)"

// bindDrift: copse_drift(model, source) → feature (VARCHAR), psi (DOUBLE), status
// (VARCHAR: 'stable' below 0.10, 'watch' below 0.25, 'shifted' from 0.25; thresholds
// common in credit scoring): the population stability index of each model input in
// the source against the training distribution the model keeps in its bins (numeric
// inputs over at most 10 groups of bins of about equal training weight, missing values
// a group of their own; categorical inputs one group per level, unseen levels counted
// as missing), in model feature order. A last row, feature '(score)', compares the
// model's scores of the source with its out-of-bag scores of its training rows, each
// source row scored by as many trees as a training row had out-of-bag votes
// (forest.Model.ScoreDrift says why); it is present for models with out-of-bag results
// (forests, bagging) and one score (two classes or regression): other models keep no
// scores of their training rows. The source needs every model input
// (columns matched as copse_explain matches them); the target may be absent.
func (h *Host) bindDrift(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_drift"
	m, e, ctx, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	// The source is read in the model's coding as copse_explain reads it.
	es, err := h.bindSource(ctx, fn, m, e, call.Args[1], nil, false)
	if err != nil {
		return nil, err
	}
	label := fmt.Sprintf("model %q (version %d)", e.Name, e.Version)
	withScore := m.OOB != nil && (m.Task != forest.Classification || len(m.Classes) == 2)
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "feature", Type: duck.Varchar}, {Name: "psi", Type: duck.Double}, {Name: "status", Type: duck.Varchar}},
		Init: func() (duck.FillFunc, error) {
			rs, err := es.read(ctx, h, m, e)
			if err != nil {
				return nil, err
			}
			if rs.n == 0 {
				return nil, fmt.Errorf("%s: %s: source %q returned no rows", fn, label, es.source)
			}
			rows, err := m.Drift(rs.cols, nil)
			if err != nil {
				return nil, fmt.Errorf("%s: %s: %w", fn, label, err)
			}
			if withScore {
				sd, err := m.ScoreDrift(rs.cols)
				if err != nil {
					return nil, fmt.Errorf("%s: %s: %w", fn, label, err)
				}
				sd.Feature = driftScoreRow
				rows = append(rows, sd)
			}
			return rowsFill(len(rows), func(out *duck.Chunk, j, r int) {
				out.SetString(0, j, rows[r].Feature)
				setFloat(out, 1, j, rows[r].PSI)
				if rows[r].Status == "" {
					out.SetNull(2, j)
				} else {
					out.SetString(2, j, rows[r].Status)
				}
			}), nil
		},
	}, nil
}
