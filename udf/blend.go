package udf

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// registerBlends registers copse_blend, which stores a blend of stored models as a new
// model version, and copse_members, which lists a blend's members.
func (h *Host) registerBlends(conn *sql.Conn) error {
	for _, f := range []duck.TableFunc{
		{Name: "copse_blend", Args: []duck.Type{duck.Varchar}, Named: []duck.Param{
			{Name: "members", Type: duck.VarcharList}, {Name: "rule", Type: duck.Varchar},
			{Name: "weights", Type: duck.Varchar}, {Name: "holdout", Type: duck.Varchar}}, Bind: h.bindBlend},
		{Name: "copse_members", Args: []duck.Type{duck.Varchar}, Bind: h.bindMembers},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return nil
}

// blendCall is one parsed copse_blend call.
type blendCall struct {
	name    string
	members []string
	rule    forest.BlendRule
	weights []float64 // nil: equal, or learned when fit
	fit     bool      // weights := 'fit': learn the weights on the holdout rows
	holdout string    // the labelled rows the weights are learned on
}

// parseBlendCall checks copse_blend's arguments: a model name, members := a non-empty list
// of model references, rule := 'average' (the default) or 'vote', weights := a
// comma-separated list of numbers ≥ 0, one per member (default: equal), or 'fit' with
// holdout := a table, table function call or query of labelled rows the members did not
// train on, to learn the weights there (stacked generalisation).
func parseBlendCall(args []any, named map[string]any) (*blendCall, error) {
	const fn = "copse_blend"
	name, ok := args[0].(string)
	if !ok {
		return nil, fmt.Errorf("%s: %w: the model name is NULL", fn, ErrCall)
	}
	if err := validModelName(name); err != nil {
		return nil, fmt.Errorf("%s: %w: %v", fn, ErrCall, err)
	}
	c := &blendCall{name: name, rule: forest.BlendAverage}
	members, _ := named["members"].([]string)
	if len(members) == 0 {
		return nil, fmt.Errorf("%s %q: %w: members := ['model', 'model@version', …] is required", fn, name, ErrCall)
	}
	for _, m := range members {
		if _, err := parseRef(m); err != nil {
			return nil, fmt.Errorf("%s %q: %w: members: %v", fn, name, ErrCall, err)
		}
	}
	c.members = members
	if r, ok := named["rule"].(string); ok {
		switch forest.BlendRule(r) {
		case forest.BlendAverage, forest.BlendVote:
			c.rule = forest.BlendRule(r)
		case "fit":
			return nil, fmt.Errorf("%s %q: %w: rule 'fit': learned weights are asked for with weights := 'fit' and holdout := '…'; the rule stays 'average' or 'vote'", fn, name, ErrCall)
		default:
			return nil, fmt.Errorf("%s %q: %w: rule '%s': want 'average' or 'vote'", fn, name, ErrCall, sqlEscape(r))
		}
	}
	if w, ok := named["weights"].(string); ok {
		if strings.TrimSpace(w) == "fit" {
			c.fit = true
			if h, _ := named["holdout"].(string); strings.TrimSpace(h) == "" {
				return nil, fmt.Errorf("%s %q: %w: weights := 'fit' needs holdout := 'a table or query': labelled rows, with the members' target column, that the members did not train on", fn, name, ErrCall)
			}
			c.holdout, _ = named["holdout"].(string)
			return c, nil
		}
		parts := strings.Split(w, ",")
		if len(parts) != len(members) {
			return nil, fmt.Errorf("%s %q: %w: weights '%s': %d weights for %d members", fn, name, ErrCall, sqlEscape(w), len(parts), len(members))
		}
		for j, p := range parts {
			v, err := strconv.ParseFloat(strings.TrimSpace(p), 64)
			if err != nil || !(v >= 0) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("%s %q: %w: weights: member '%s' has weight '%s'; want a finite number ≥ 0", fn, name, ErrCall, sqlEscape(members[j]), sqlEscape(strings.TrimSpace(p)))
			}
			c.weights = append(c.weights, v)
		}
	}
	if _, ok := named["holdout"].(string); ok {
		return nil, fmt.Errorf("%s %q: %w: holdout := is only read with weights := 'fit'", fn, name, ErrCall)
	}
	return c, nil
}

// bindBlend checks the options; loading the members, building and saving happen in the
// first fill, so binding has no side effects.
func (h *Host) bindBlend(call duck.TableCall) (*duck.TableBinding, error) {
	c, err := parseBlendCall(call.Args, call.Named)
	if err != nil {
		return nil, err
	}
	return h.savingBinding(call.ConnID, func(ctx context.Context) (trainResult, error) {
		e, err := h.blend(ctx, c)
		return trainResult{entry: e}, err
	}), nil
}

// blend loads the members, builds the blend and saves it as a new version of c.name.
// With weights := 'fit' it first scores the members on the holdout rows and learns the
// weights there (forest.FitBlendWeights), and the catalog's source text records the rows
// and the loss, which the blend also keeps (forest.Blend.Fitted). Nothing reaches the
// catalog unless every step succeeds.
func (h *Host) blend(ctx context.Context, c *blendCall) (Entry, error) {
	const fn = "copse_blend"
	members := make([]*forest.Model, len(c.members))
	names := make([]string, len(c.members))
	target := ""
	// kinds: each member feature's recorded source kind, by name; the first member
	// recording one wins.
	kinds := map[string]string{}
	for j, ref := range c.members {
		m, e, err := h.loadModel(ctx, ref)
		if err != nil {
			return Entry{}, fmt.Errorf("%s %q: member '%s': %w", fn, c.name, sqlEscape(ref), err)
		}
		if j == 0 {
			target = m.Target
		} else if m.Target != target {
			return Entry{}, fmt.Errorf("%s %q: member '%s' predicts %q, the first member %q", fn, c.name, sqlEscape(ref), m.Target, target)
		}
		members[j], names[j] = m, fmt.Sprintf("%s@%d", e.Name, e.Version)
		if len(e.FeatureTypes) == len(m.Features) {
			for i, f := range m.Features {
				if k := e.FeatureTypes[i]; k != "" && kinds[f.Name] == "" {
					kinds[f.Name] = k
				}
			}
		}
	}
	b, err := forest.NewBlend(target, members, names, c.weights, c.rule)
	if err != nil {
		return Entry{}, fmt.Errorf("%s %q: %w", fn, c.name, err)
	}
	source := "blend of " + strings.Join(names, ", ")
	if c.fit {
		preds, y, err := h.holdoutScores(ctx, c, b, names)
		if err != nil {
			return Entry{}, err
		}
		fit, err := forest.FitBlendWeights(b.Task, b.Width(), preds, y, nil)
		if err != nil {
			return Entry{}, fmt.Errorf("%s %q: holdout: %w", fn, c.name, err)
		}
		if b, err = forest.NewFittedBlend(target, members, names, fit, c.rule); err != nil {
			return Entry{}, fmt.Errorf("%s %q: %w", fn, c.name, err)
		}
		source += fmt.Sprintf("; weights fitted on %d holdout rows, %s %.6g (members alone: %s); holdout: %s",
			fit.Rows, fit.Metric, fit.Loss, formatLosses(fit.MemberLoss), strings.TrimSpace(c.holdout))
	}
	var types []string // nil: no member recorded any kind
	if len(kinds) > 0 {
		types = make([]string, len(b.Features))
		for i, f := range b.Features {
			types[i] = kinds[f.Name] // "": not known, stored as NULL
		}
	}
	e, err := h.saveModel(ctx, c.name, b, source, nil, nil, nil, types)
	if err != nil {
		return Entry{}, fmt.Errorf("%s %q: %w", fn, c.name, err)
	}
	return e, nil
}

// bindMembers: copse_members(model) → member (name@version as blended), weight
// (normalised to sum 1), rule, and for learned weights the rows they were fitted on:
// fit_metric ('holdout_mse' or 'holdout_log_loss'), fit_rows, member_loss (the member
// alone on those rows) and blend_loss (the blend); these four are NULL when the weights
// were given. One row per member of a blend, in blend order.
func (h *Host) bindMembers(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_members"
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	b := m.Blend
	if b == nil {
		return nil, fmt.Errorf("%s: model %q (version %d), method %s, has no members: only copse_blend makes blends",
			fn, e.Name, e.Version, m.Method)
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "member", Type: duck.Varchar}, {Name: "weight", Type: duck.Double},
			{Name: "rule", Type: duck.Varchar}, {Name: "fit_metric", Type: duck.Varchar}, {Name: "fit_rows", Type: duck.BigInt},
			{Name: "member_loss", Type: duck.Double}, {Name: "blend_loss", Type: duck.Double}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(len(b.Members), func(out *duck.Chunk, j, r int) {
				out.SetString(0, j, b.Names[r])
				out.SetFloat64(1, j, b.Weights[r])
				out.SetString(2, j, string(b.Rule))
				f := b.Fitted
				if f == nil {
					for col := 3; col < 7; col++ {
						out.SetNull(col, j)
					}
					return
				}
				out.SetString(3, j, "holdout_"+f.Metric)
				out.SetInt64(4, j, int64(f.Rows))
				setFloat(out, 5, j, f.MemberLoss[r])
				setFloat(out, 6, j, f.Loss)
			}), nil
		},
	}, nil
}

// formatLosses spells member losses for the catalog's source text.
func formatLosses(v []float64) string {
	s := make([]string, len(v))
	for j, x := range v {
		s[j] = strconv.FormatFloat(x, 'g', 6, 64)
	}
	return strings.Join(s, ", ")
}

// holdoutAlias names the holdout row inside the scoring query.
const holdoutAlias = "copse_holdout"

// holdoutScores reads c.holdout on a pooled connection, as copse_train reads its source,
// and scores every member on its rows with copse_score, so that the rows are matched
// to the members' features exactly as scoring does. It returns each member's
// predictions row-major (class probabilities in class order, or values) and the target:
// the class index or the value. Rows whose target is NULL are left out.
func (h *Host) holdoutScores(ctx context.Context, c *blendCall, b *forest.Model, names []string) ([][]float64, []float64, error) {
	const fn = "copse_blend"
	fail := func(format string, args ...any) error {
		return fmt.Errorf("%s %q: holdout %q: %s", fn, c.name, strings.TrimSpace(c.holdout), fmt.Sprintf(format, args...))
	}
	q, err := sourceQuery(c.holdout)
	if err != nil {
		return nil, nil, fmt.Errorf("%s %q: holdout: %w", fn, c.name, err)
	}
	cols, err := h.describeQuery(ctx, q)
	if err != nil {
		return nil, nil, fail("%s", duckMessage(err))
	}
	target := -1
	for i, col := range cols {
		if col.name == b.Target {
			target = i
			break
		}
	}
	for i, col := range cols {
		if target < 0 && strings.EqualFold(col.name, b.Target) {
			target = i
		}
	}
	if target < 0 {
		return nil, nil, fail("has no column %q, the members' target: the weights are fitted on labelled rows (columns: %s)", b.Target, columnList(cols))
	}
	tc := cols[target]
	cls := b.Task == forest.Classification
	if tc.kind == kindUnsupported || !cls && tc.kind == kindCategorical {
		return nil, nil, fail("target column %q is %s, which a %s blend cannot compare with its predictions", tc.name, tc.typ, b.Task)
	}
	// Classes named by text ('true'/'false' for BOOLEAN) are read as text; numeric
	// classes and values as numbers (numeric classes then named as copse_train names them).
	byText := cls && (tc.kind == kindCategorical || tc.kind == kindBoolean)
	targetExpr := "CAST(" + holdoutAlias + "." + quoteIdent(tc.name) + " AS DOUBLE)"
	if byText {
		targetExpr = "CAST(" + holdoutAlias + "." + quoteIdent(tc.name) + " AS VARCHAR)"
	}
	from := " FROM (\n" + q + "\n) AS " + holdoutAlias
	// score is one member's prediction columns; classification gives every class's
	// probability by name.
	score := func(name string) []string {
		model := "'" + sqlEscape(name) + "'"
		if !cls {
			return []string{"copse_score(" + model + ", " + holdoutAlias + ")"}
		}
		var out []string
		for _, k := range b.Classes {
			out = append(out, "copse_score("+model+", "+holdoutAlias+", '"+sqlEscape(k)+"')")
		}
		return out
	}
	// Each member alone first, without rows, so that one that cannot score the holdout
	// (a feature column missing or of the wrong type) is named.
	for _, name := range names {
		rows, err := h.db.QueryContext(ctx, "SELECT "+strings.Join(score(name), ", ")+from+" LIMIT 0")
		if err == nil {
			err = rows.Close()
		}
		if err != nil {
			return nil, nil, fail("member %q cannot score its rows: %s", name, duckMessage(err))
		}
	}
	exprs := []string{targetExpr}
	for _, name := range names {
		exprs = append(exprs, score(name)...)
	}
	rows, err := h.db.QueryContext(ctx, "SELECT "+strings.Join(exprs, ", ")+from)
	if err != nil {
		return nil, nil, fail("%s", duckMessage(err))
	}
	defer rows.Close()
	W := b.Width()
	M := len(names)
	preds := make([][]float64, M)
	var y []float64
	classOf := make(map[string]int, len(b.Classes))
	for k, name := range b.Classes {
		classOf[name] = k
	}
	vals := make([]sql.NullFloat64, M*W)
	ptrs := make([]any, 1+len(vals))
	var label sql.NullString
	var value sql.NullFloat64
	ptrs[0] = &value
	if byText {
		ptrs[0] = &label
	}
	for i := range vals {
		ptrs[1+i] = &vals[i]
	}
	for r := 1; rows.Next(); r++ {
		if err := rows.Scan(ptrs...); err != nil {
			return nil, nil, fail("row %d: %v", r, err)
		}
		var t float64
		switch p := ptrs[0].(type) {
		case *sql.NullString:
			if !p.Valid {
				continue
			}
			k, ok := classOf[p.String]
			if !ok {
				return nil, nil, fail("row %d: %s '%s' is not one of the members' classes (%s)", r, tc.name, sqlEscape(p.String), quotedList(b.Classes))
			}
			t = float64(k)
		case *sql.NullFloat64:
			if !p.Valid {
				continue
			}
			t = p.Float64
			if cls {
				lab := numberLabel(t, false)
				k, ok := classOf[lab]
				if !ok {
					return nil, nil, fail("row %d: %s %s is not one of the members' classes (%s)", r, tc.name, lab, quotedList(b.Classes))
				}
				t = float64(k)
			} else if math.IsNaN(t) || math.IsInf(t, 0) {
				continue // as copse_train, which reads no target NaN
			}
		}
		for i, v := range vals {
			if !v.Valid {
				return nil, nil, fail("row %d: member %q gave no prediction", r, names[i/W])
			}
			preds[i/W] = append(preds[i/W], v.Float64)
		}
		y = append(y, t)
	}
	if err := rows.Err(); err != nil {
		return nil, nil, fail("%s", duckMessage(err))
	}
	if len(y) == 0 {
		return nil, nil, fail("has no rows with a %s value: the weights are fitted on labelled rows", tc.name)
	}
	return preds, y, nil
}

// describeQuery returns a query's columns without running it.
func (h *Host) describeQuery(ctx context.Context, q string) ([]srcColumn, error) {
	rows, err := h.db.QueryContext(ctx, "DESCRIBE "+q)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	names, err := rows.Columns()
	if err != nil {
		return nil, err
	}
	vals := make([]any, len(names))
	ptrs := make([]any, len(names))
	for i := range vals {
		ptrs[i] = &vals[i]
	}
	var cols []srcColumn
	for rows.Next() {
		if err := rows.Scan(ptrs...); err != nil {
			return nil, err
		}
		name, _ := vals[0].(string)
		typ, _ := vals[1].(string)
		col := kindOfTypeName(typ)
		col.name = name
		cols = append(cols, col)
	}
	return cols, rows.Err()
}

// duckMessage is a DuckDB error without the caret that points into the query copse built
// around the user's SQL, with the hint for names the pooled connection cannot see.
func duckMessage(err error) string {
	msg := strings.TrimPrefix(err.Error(), "duck: read: ")
	if i := strings.Index(msg, "\n\nLINE "); i >= 0 {
		msg = msg[:i]
	}
	msg = strings.TrimSpace(msg)
	if strings.Contains(msg, "Catalog Error") {
		msg += "\n(the holdout is read on a connection of its own, which sees committed data only: TEMP tables and rows not yet committed are invisible to it)"
	}
	return msg
}
