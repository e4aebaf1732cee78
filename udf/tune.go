package udf

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// maxCombinations bounds a grid: each combination is a full training (k of them with
// folds), so a grid larger than this is far more often a typing slip than a plan.
const maxCombinations = 256

// untunable are copse_train options that say what to learn from, not how: the grid
// may not vary them. seed is among them: picking the luckiest random draw is no model
// choice.
var untunable = map[string]string{
	"target": "it names the column to predict", "task": "it says what the target is",
	"weight": "it names a column", "key": "it names a column", "exclude": "it chooses the inputs",
	"positive": "it names a class", "exposure": "it names a column", "threads": "it never changes a model",
	"seed": "choosing the luckiest random draw is no model choice",
}

// gridOption is one tuned option and the values it takes.
type gridOption struct {
	name   string
	values []any // float64, string or bool, as copse_train's option type wants
}

// parseGrid reads grid := '{"option": [values…], …}', a JSON object whose keys are
// copse_train options and whose values are non-empty lists; the keys keep their order.
// DuckDB passes a table function no MAP or STRUCT through our registration, so the grid
// is text; a STRUCT literal {'max_depth': [4, 8]} arrives cast to that same text with
// single quotes, which is read too.
func parseGrid(text string, fixed map[string]any) ([]gridOption, error) {
	dec := json.NewDecoder(strings.NewReader(structJSON(text)))
	dec.UseNumber()
	bad := func(err error) error {
		return fmt.Errorf("grid %q: %v; want a JSON object of option lists such as {\"max_depth\": [4, 8], \"features_per_split\": [0.2, 0.5]}", text, err)
	}
	if tok, err := dec.Token(); err != nil {
		return nil, bad(err)
	} else if tok != json.Delim('{') {
		return nil, bad(errors.New("not an object"))
	}
	types := map[string]duck.Type{}
	for _, o := range trainOptions {
		types[o.Name] = o.Type
	}
	var grid []gridOption
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, bad(err)
		}
		name := strings.ToLower(tok.(string))
		typ, known := types[name]
		switch {
		case !known:
			return nil, fmt.Errorf("grid: unknown option %q; the grid varies copse_train options such as max_depth, features_per_split, min_leaf, trees", tok)
		case untunable[name] != "":
			return nil, fmt.Errorf("grid: option %q cannot be tuned: %s; give it as a fixed option", name, untunable[name])
		case fixed[name] != nil:
			return nil, fmt.Errorf("grid: option %q is also given as a fixed option; give it in one place", name)
		case slices.ContainsFunc(grid, func(g gridOption) bool { return g.name == name }):
			return nil, fmt.Errorf("grid: option %q is given twice", name)
		}
		var raw []json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return nil, fmt.Errorf("grid: option %q: want a list of values, such as [4, 8]", name)
		}
		if len(raw) == 0 {
			return nil, fmt.Errorf("grid: option %q has an empty list; give at least one value", name)
		}
		g := gridOption{name: name}
		for _, r := range raw {
			v, err := gridValue(r, typ)
			if err != nil {
				return nil, fmt.Errorf("grid: option %q: value %s: %w", name, r, err)
			}
			g.values = append(g.values, v)
		}
		grid = append(grid, g)
	}
	if _, err := dec.Token(); err != nil {
		return nil, bad(err)
	}
	if dec.More() {
		return nil, bad(errors.New("text after the object"))
	}
	if _, err := dec.Token(); err == nil {
		return nil, bad(errors.New("text after the object"))
	}
	if len(grid) == 0 {
		return nil, fmt.Errorf("grid %q names no option; give at least one option and its values", text)
	}
	n := 1
	for _, g := range grid {
		n *= len(g.values)
		if n > maxCombinations {
			return nil, fmt.Errorf("grid: more than %d combinations; each is a training: narrow the grid", maxCombinations)
		}
	}
	return grid, nil
}

// structJSON turns DuckDB's text of a STRUCT of lists ({'max_depth': [4, 8], 'impurity':
// [gini, entropy]}: names in single quotes, list strings bare unless they hold special
// characters, then single-quoted with backslash escapes) into JSON. Text whose first
// name is double-quoted is JSON already and is returned as it is.
func structJSON(s string) string {
	t := strings.TrimSpace(s)
	if !strings.HasPrefix(t, "{") || strings.HasPrefix(strings.TrimSpace(t[1:]), `"`) {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(t); {
		switch ch := t[i]; {
		case strings.IndexByte("{}[]:, \t\r\n", ch) >= 0:
			b.WriteByte(ch)
			i++
		case ch == '\'':
			var v strings.Builder
			i++
			for i < len(t) && t[i] != '\'' {
				if t[i] == '\\' && i+1 < len(t) {
					i++
				}
				v.WriteByte(t[i])
				i++
			}
			i++ // the closing quote
			q, _ := json.Marshal(v.String())
			b.Write(q)
		default:
			end := i
			for end < len(t) && strings.IndexByte(",]}:", t[end]) < 0 {
				end++
			}
			word := strings.TrimSpace(t[i:end])
			if _, err := strconv.ParseFloat(word, 64); err == nil || word == "true" || word == "false" {
				b.WriteString(word)
			} else {
				q, _ := json.Marshal(word)
				b.Write(q)
			}
			i = end
		}
	}
	return b.String()
}

// gridValue converts one grid value to what copse_train's parser takes for an option of
// type typ.
func gridValue(r json.RawMessage, typ duck.Type) (any, error) {
	var v any
	dec := json.NewDecoder(bytes.NewReader(r))
	dec.UseNumber()
	if err := dec.Decode(&v); err != nil {
		return nil, err
	}
	switch typ {
	case duck.Double:
		n, ok := v.(json.Number)
		if !ok {
			return nil, errors.New("want a number")
		}
		return n.Float64()
	case duck.Varchar:
		s, ok := v.(string)
		if !ok {
			return nil, errors.New("want a string")
		}
		return s, nil
	case duck.Boolean:
		b, ok := v.(bool)
		if !ok {
			return nil, errors.New("want true or false")
		}
		return b, nil
	}
	return nil, errors.New("this option cannot be tuned")
}

// gridText writes a value as JSON.
func gridText(v any) string {
	switch x := v.(type) {
	case float64:
		return strconv.FormatFloat(x, 'g', -1, 64)
	case bool:
		return strconv.FormatBool(x)
	}
	b, _ := json.Marshal(v)
	return string(b)
}

// combination is one point of the grid: its options as JSON text and the parsed call.
type combination struct {
	text string
	call *trainCall
}

// combinations expands a grid in order (the last option varies fastest) and parses
// each point with the fixed options through copse_train's own parser, so a value that
// fails its checks is an error here, at bind, before any training.
func combinations(model string, source any, fixed map[string]any, grid []gridOption) ([]combination, error) {
	var out []combination
	idx := make([]int, len(grid))
	for {
		named := without(fixed)
		parts := make([]string, len(grid))
		for g, o := range grid {
			v := o.values[idx[g]]
			named[o.name] = v
			parts[g] = strconv.Quote(o.name) + ": " + gridText(v)
		}
		text := "{" + strings.Join(parts, ", ") + "}"
		c, err := parseTrainCall([]any{model, source}, named)
		if err != nil {
			return nil, rename(err, model, fmt.Sprintf("copse_tune %q: grid combination %s", model, text))
		}
		out = append(out, combination{text: text, call: c})
		g := len(grid) - 1
		for ; g >= 0; g-- {
			if idx[g]++; idx[g] < len(grid[g].values) {
				break
			}
			idx[g] = 0
		}
		if g < 0 {
			return out, nil
		}
	}
}

// tuneCall is one bound copse_tune call.
type tuneCall struct {
	name   string
	combos []combination
	folds  int    // 0: out-of-bag
	metric string // "" for the task's first validation metric
}

// bagged reports whether a method keeps out-of-bag predictions.
func bagged(m forest.Method) bool { return m == forest.MethodForest || m == forest.MethodBagging }

// validationMetricNames are every metric copse_tune may rank by.
var validationMetricNames = []string{"error", "accuracy", "auc", "log_loss", "brier", "rmse", "mae", "r2"}

// tuneRow is one row of copse_tune's result.
type tuneRow struct {
	combination string
	metric      string
	value, std  float64 // std: NaN out-of-bag
	rank        int
	chosen      bool
}

// bindTune: copse_tune(model, source, target := …, grid := '{"max_depth": [4, 8, 12]}',
// folds := 0 | k, metric := …, <fixed copse_train options>) → combination (JSON text of
// the tuned options), estimate ('out_of_bag' or 'crossval'), metric, value, std (over
// folds; NULL out-of-bag), rank (1 = best; ties keep grid order), chosen, version (of the
// stored model, on the chosen row; NULL elsewhere).
//
// folds := 0 ranks by each model's out-of-bag estimate (forest and bagging only, one
// training per combination); folds := k by the mean over k folds, as copse_crossval.
// Without folds, bagged methods go out-of-bag and the others use 5 folds. The metric is
// one of copse_crossval's, by default error (classes) or rmse (numbers). The best
// combination, trained on every row, is stored as a new version of model; nothing is
// stored when any step fails or the query is cancelled.
func (h *Host) bindTune(call duck.TableCall) (*duck.TableBinding, error) {
	model, _ := call.Args[0].(string)
	if call.Args[0] == nil {
		return nil, errors.New("copse_tune: the model name is NULL")
	}
	if err := validModelName(model); err != nil {
		return nil, fmt.Errorf("copse_tune: %w", err)
	}
	fn := fmt.Sprintf("copse_tune %q", model)
	fixed := without(call.Named, "grid", "folds", "metric")
	gridText, ok := call.Named["grid"].(string)
	if !ok {
		return nil, fmt.Errorf(`%s: grid := '{"option": [values], …}' is required: name the options to tune and their values`, fn)
	}
	grid, err := parseGrid(gridText, fixed)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", fn, err)
	}
	// The fixed options alone must parse, so that their errors name no combination;
	// unless the grid varies the method, which decides which options apply.
	if _, err := parseTrainCall([]any{model, call.Args[1]}, fixed); err != nil &&
		!slices.ContainsFunc(grid, func(g gridOption) bool { return g.name == "method" }) {
		return nil, rename(err, model, fn)
	}
	combos, err := combinations(model, call.Args[1], fixed, grid)
	if err != nil {
		return nil, err
	}
	base := combos[0].call // the source, target and columns are the same for all
	allBagged := true
	for _, c := range combos {
		allBagged = allBagged && bagged(c.call.params.Method)
	}
	def := defaultFolds
	if allBagged {
		def = 0
	}
	k, err := foldsOption(fn, call.Named, def, true)
	if err != nil {
		return nil, err
	}
	if k == 0 {
		for _, c := range combos {
			if m := c.call.params.Method; !bagged(m) {
				return nil, fmt.Errorf("%s: folds := 0 ranks by out-of-bag estimates, which method '%s' does not keep; give folds := 5", fn, m)
			}
		}
	}
	tc := &tuneCall{name: model, combos: combos, folds: k}
	if v, ok := call.Named["metric"].(string); ok {
		tc.metric = strings.ToLower(strings.TrimSpace(v))
		if !slices.Contains(validationMetricNames, tc.metric) {
			return nil, fmt.Errorf("%s: metric %q: want one of %s", fn, v, quotedList(validationMetricNames))
		}
	}
	ctx := h.contextOf(call.ConnID)
	cols, err := h.describe(ctx, base)
	if err != nil {
		return nil, rename(err, model, fn)
	}
	l, err := base.resolve(cols)
	if err != nil {
		return nil, rename(err, model, fn)
	}
	for _, c := range combos {
		if err := c.call.checkLoss(l, cols); err != nil {
			return nil, rename(err, model, fn+": grid combination "+c.text)
		}
	}
	estimate := "out_of_bag"
	if k > 0 {
		estimate = "crossval"
	}
	connID := call.ConnID
	return &duck.TableBinding{
		Columns: []duck.Column{
			{Name: "combination", Type: duck.Varchar}, {Name: "estimate", Type: duck.Varchar},
			{Name: "metric", Type: duck.Varchar}, {Name: "value", Type: duck.Double},
			{Name: "std", Type: duck.Double}, {Name: "rank", Type: duck.BigInt},
			{Name: "chosen", Type: duck.Boolean}, {Name: "version", Type: duck.BigInt},
		},
		Init: func() (duck.FillFunc, error) {
			var rows []tuneRow
			var e Entry
			return onceRows(func() (int, error) {
				var err error
				rows, e, err = h.tune(h.contextOf(connID), tc)
				return len(rows), rename(err, model, fn)
			}, func(out *duck.Chunk, j, i int) {
				r := rows[i]
				out.SetString(0, j, r.combination)
				out.SetString(1, j, estimate)
				out.SetString(2, j, r.metric)
				setFloat(out, 3, j, r.value)
				setFloat(out, 4, j, r.std)
				out.SetInt64(5, j, int64(r.rank))
				out.SetBool(6, j, r.chosen)
				if r.chosen {
					out.SetInt64(7, j, int64(e.Version))
				} else {
					out.SetNull(7, j)
				}
			}), nil
		},
	}, nil
}

// tune scores every combination, ranks them and stores the best. Only the last step
// writes, in one transaction.
func (h *Host) tune(ctx context.Context, tc *tuneCall) ([]tuneRow, Entry, error) {
	runs := max(tc.folds, 1)
	total := 0
	for _, c := range tc.combos {
		total += c.call.params.Trees * runs
	}
	first := tc.combos[0].call
	job := h.jobs.start(tc.name, string(first.params.Method), total)
	defer h.jobs.finish(job)
	data, err := h.readTraining(ctx, first)
	if err != nil {
		return nil, Entry{}, err
	}
	fail := func(err error) ([]tuneRow, Entry, error) {
		return nil, Entry{}, fmt.Errorf("copse_train %q: %w", tc.name, err)
	}
	var folds [][]int32
	if tc.folds > 0 {
		if folds, err = forest.Folds(data.set, tc.folds, first.params.Seed); err != nil {
			return fail(err)
		}
	}
	h.jobs.update(job, func(j *Job) { j.Stage = "training" })
	doneBefore := 0
	progress := func(done int) {
		h.jobs.update(job, func(j *Job) { j.TreesDone = doneBefore + done })
	}
	rows := make([]tuneRow, len(tc.combos))
	var best *forest.Model // out-of-bag: the best model so far, trained on every row
	bestAt := -1
	for i, c := range tc.combos {
		p := c.call.params
		var ms, std []forest.Metric
		var m *forest.Model
		if tc.folds == 0 {
			p.Progress = func(done, _ int) { progress(done) }
			if m, err = forest.Train(ctx, data.set, p); err != nil {
				return fail(fmt.Errorf("grid combination %s: %w", c.text, err))
			}
			if ms, err = forest.OOBMetrics(m, data.set); err != nil {
				return fail(fmt.Errorf("grid combination %s: %w", c.text, err))
			}
		} else {
			p.PermutationRows = -1 // not kept, and it does not change predictions
			per, err := forest.CrossValidate(ctx, data.set, p, folds, func(fold, done, total int) { progress(fold*total + done) })
			if err != nil {
				return fail(fmt.Errorf("grid combination %s: %w", c.text, err))
			}
			ms, std = forest.Summarize(per)
		}
		doneBefore += p.Trees * runs
		name := tc.metric
		if name == "" {
			name = ms[0].Name // error or rmse
		}
		k := slices.IndexFunc(ms, func(x forest.Metric) bool { return x.Name == name })
		if k < 0 {
			var have []string
			for _, x := range ms {
				have = append(have, x.Name)
			}
			return fail(fmt.Errorf("metric %q does not apply to this target; want one of %s", name, quotedList(have)))
		}
		rows[i] = tuneRow{combination: c.text, metric: name, value: ms[k].Value, std: math.NaN()}
		if std != nil {
			rows[i].std = std[k].Value
		}
		if bestAt < 0 || better(name, rows[i].value, rows[bestAt].value) {
			bestAt, best = i, m
		}
	}
	order := make([]int, len(rows))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		switch {
		case better(rows[a].metric, rows[a].value, rows[b].value):
			return -1
		case better(rows[b].metric, rows[b].value, rows[a].value):
			return 1
		}
		return 0
	})
	for r, i := range order {
		rows[i].rank = r + 1
	}
	rows[bestAt].chosen = true
	if order[0] != bestAt {
		return fail(fmt.Errorf("internal error: ranking and choice disagree")) // cannot happen: both keep the first of ties
	}
	win := tc.combos[bestAt].call
	if best == nil {
		h.jobs.update(job, func(j *Job) { j.Stage = "training the best"; j.TreesDone, j.Trees = 0, win.params.Trees })
		p := win.params
		p.Progress = func(done, total int) { h.jobs.update(job, func(j *Job) { j.TreesDone, j.Trees = done, total }) }
		if best, err = forest.Train(ctx, data.set, p); err != nil {
			return fail(err)
		}
	}
	h.jobs.update(job, func(j *Job) { j.Stage = "saving" })
	types := make([]string, len(best.Features))
	for i, f := range best.Features {
		types[i] = data.featureTypes[f.Name]
	}
	e, err := h.saveModel(ctx, tc.name, best, win.source, data.keys, data.keyNull, data.actuals, types)
	if err != nil {
		return fail(err)
	}
	return rows, e, nil
}

// better reports whether value a beats value b on the named metric; NaN (undefined)
// beats nothing and everything beats it.
func better(metric string, a, b float64) bool {
	switch {
	case math.IsNaN(a):
		return false
	case math.IsNaN(b):
		return true
	case forest.LowerIsBetter(metric):
		return a < b
	}
	return a > b
}
