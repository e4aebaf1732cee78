package udf

import (
	"cmp"
	"context"
	"database/sql"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/duckdb/duckdb-go/v2/mapping"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// registerExplain registers copse_explain, copse_reasons and copse_dependence, which
// read a source and explain a model's scores on its rows, and copse_trees, which lists
// a model's nodes.
//
// The source is a table or view name, a table function call or a query, read like
// copse_train's on a connection of its own (committed data only). Its columns feed the
// model's features by name, exact first and then ignoring case, with the types
// copse_score takes; other columns are ignored. NULL and unseen levels are missing
// values.
func (h *Host) registerExplain(conn *sql.Conn) error {
	for _, f := range []duck.TableFunc{
		{Name: "copse_explain", Args: []duck.Type{duck.Varchar, duck.Varchar}, Named: []duck.Param{
			{Name: "top", Type: duck.Double}, {Name: "key", Type: duck.Varchar}, {Name: "threads", Type: duck.Double}},
			Bind: h.bindExplain},
		{Name: "copse_reasons", Args: []duck.Type{duck.Varchar, duck.Varchar}, Named: []duck.Param{
			{Name: "top", Type: duck.Double}, {Name: "toward", Type: duck.Varchar}, {Name: "key", Type: duck.Varchar},
			{Name: "threads", Type: duck.Double}},
			Bind: h.bindReasons},
		{Name: "copse_dependence", Args: []duck.Type{duck.Varchar, duck.Varchar, duck.Varchar}, Named: []duck.Param{
			{Name: "points", Type: duck.Double}, {Name: "individual", Type: duck.Boolean}, {Name: "key", Type: duck.Varchar},
			{Name: "threads", Type: duck.Double}},
			Bind: h.bindDependence},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return h.registerTrees(conn)
}

// exWholeOption reads a named whole-number option declared DOUBLE (so that 4 and 4.0
// both work): ok is false when it was not given or is NULL; a fraction or a value
// outside [lo, hi] is an error naming it.
func exWholeOption(fn string, named map[string]any, name string, lo, hi int) (v int, ok bool, err error) {
	x, ok := named[name].(float64)
	if !ok {
		return 0, false, nil
	}
	if x != math.Trunc(x) || x < float64(lo) || x > float64(hi) {
		return 0, false, fmt.Errorf("%s: %w: %s := %v: want a whole number from %d to %d", fn, ErrCall, name, x, lo, hi)
	}
	return int(x), true, nil
}

// exThreadsOption is the threads := option: how many goroutines explain rows (default
// GOMAXPROCS). The result never depends on it.
func exThreadsOption(fn string, named map[string]any) (int, error) {
	n, ok, err := exWholeOption(fn, named, "threads", 1, 1024)
	if err != nil || !ok {
		return runtime.GOMAXPROCS(0), err
	}
	return n, nil
}

// explainSource is a source as bind resolved it for one model: the query, which column
// feeds each feature, and the key column.
type explainSource struct {
	fn     string
	label  string // the model, as 'name' (version n), for messages
	source string // as the user wrote it, trimmed
	query  string
	feat   []string // the source column feeding each model feature
	key    string   // the key column, "" for none
	keyInt bool     // the key column holds integers: the key is returned as BIGINT
	// ordinal keys rows by their position in the source (1 for the first row read),
	// when no key := names a column.
	ordinal bool
}

// exIntegerTypes are the types whose values a BIGINT key holds exactly.
var exIntegerTypes = map[string]bool{"TINYINT": true, "SMALLINT": true, "INTEGER": true, "BIGINT": true,
	"UTINYINT": true, "USMALLINT": true, "UINTEGER": true}

// bindSource checks the source against the model without running it (DESCRIBE binds the
// query only): every feature has a column of a fitting type, and the key column exists.
// Without key := and with needKey set, rows are keyed by their position in the source.
func (h *Host) bindSource(ctx context.Context, fn string, m *forest.Model, e Entry, src any, named map[string]any, needKey bool) (*explainSource, error) {
	s, ok := src.(string)
	if !ok {
		return nil, fmt.Errorf("%s: %w: the source is NULL: give a table or view name, a table function call or a query", fn, ErrCall)
	}
	es := &explainSource{fn: fn, label: fmt.Sprintf("%q (version %d)", e.Name, e.Version), source: strings.TrimSpace(s)}
	q, err := sourceQuery(es.source)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", fn, err)
	}
	es.query = q
	cols, err := h.describeQuery(ctx, q)
	if err != nil {
		return nil, es.sourceErr(err)
	}
	find := func(name string) (int, error) {
		i, twice, cases := columnIndex(cols, name)
		switch {
		case twice:
			return -1, fmt.Errorf("source %q has two columns named %q", es.source, name)
		case cases:
			return -1, fmt.Errorf("source %q has several columns named %q in different cases", es.source, name)
		}
		return i, nil
	}
	es.feat = make([]string, len(m.Features))
	for f, fi := range m.Features {
		i, err := find(fi.Name)
		if err != nil {
			return nil, fmt.Errorf("%s: model %s: feature %q: %w", fn, es.label, fi.Name, err)
		}
		if i < 0 {
			return nil, fmt.Errorf("%s: %w: model %s needs feature %q, which source %q lacks (its columns: %s)",
				fn, ErrRow, es.label, fi.Name, es.source, columnList(cols))
		}
		c := cols[i]
		switch {
		case c.kind == kindUnsupported:
			return nil, fmt.Errorf("%s: %w: model %s: feature %q: source column %q is %s, which no feature takes",
				fn, ErrRow, es.label, fi.Name, c.name, c.typ)
		case fi.Kind == forest.Numeric && c.kind == kindCategorical:
			return nil, fmt.Errorf("%s: %w: model %s: feature %q is numeric, but source column %q is %s; cast it to a number",
				fn, ErrRow, es.label, fi.Name, c.name, c.typ)
		case fi.Kind == forest.Categorical && c.kind == kindNumeric:
			return nil, fmt.Errorf("%s: %w: model %s: feature %q is categorical, but source column %q is %s; cast it to VARCHAR",
				fn, ErrRow, es.label, fi.Name, c.name, c.typ)
		}
		es.feat[f] = c.name
	}
	if v, given := named["key"]; given && v != nil {
		k, _ := v.(string)
		i, err := find(k)
		if err != nil {
			return nil, fmt.Errorf("%s: key %q: %w", fn, k, err)
		}
		if i < 0 {
			return nil, fmt.Errorf("%s: %w: key %q: no such column in source %q (its columns: %s)", fn, ErrCall, k, es.source, columnList(cols))
		}
		es.key = cols[i].name
		if slices.Contains(es.feat, es.key) {
			return nil, fmt.Errorf("%s: %w: key %q is also a feature of model %s; name a column that only identifies rows", fn, ErrCall, k, es.label)
		}
		es.keyInt = exIntegerTypes[strings.ToUpper(cols[i].typ)]
	} else if needKey {
		// No key column named: each row is keyed by its position in the source.
		es.ordinal, es.keyInt = true, true
	}
	return es, nil
}

// keyColumn is the result column of the key: BIGINT for integer key columns, VARCHAR
// (the value as DuckDB prints it) for any other type.
func (es *explainSource) keyColumn() duck.Column {
	if es.keyInt {
		return duck.Column{Name: "key", Type: duck.BigInt}
	}
	return duck.Column{Name: "key", Type: duck.Varchar}
}

// sourceErr reports a failure of the source query in DuckDB's words, without the caret
// that points into the query copse built around it.
func (es *explainSource) sourceErr(err error) error {
	msg := strings.TrimPrefix(err.Error(), "duck: read: ")
	if i := strings.Index(msg, "\n\nLINE "); i >= 0 {
		msg = msg[:i]
	}
	msg = strings.TrimSpace(msg)
	if strings.Contains(msg, "Catalog Error") {
		msg += "\n(the source is read on a connection of its own, which sees committed data only: TEMP tables and rows not yet committed are invisible to it)"
	}
	return fmt.Errorf("%s: source %q: %s", es.fn, es.source, msg)
}

// exSourceRows is a source read in a model's coding, with what the results show of it.
type exSourceRows struct {
	n       int
	cols    [][]float64          // per model feature, as for forest.Model.Predict
	raw     []*duck.ResultColumn // per model feature, the column as read (for value texts)
	keys    *duck.ResultColumn   // the key column, read as text; nil without a key
	ints    []int64              // keyInt: each key level as a number
	ordinal bool                 // the key is the row's position in the source
}

// read runs the source on a pooled connection and codes its rows for the model.
func (es *explainSource) read(ctx context.Context, h *Host, m *forest.Model, e Entry) (*exSourceRows, error) {
	need := map[string]bool{}
	for _, c := range es.feat {
		need[c] = true
	}
	q := es.query
	if es.key != "" {
		need[es.key] = true
		k := quoteIdent(es.key)
		q = "SELECT * REPLACE (CAST(" + k + " AS VARCHAR) AS " + k + ") FROM (\n" + q + "\n) AS copse_keyed"
	}
	res, err := duck.ReadColumns(ctx, h.db, q, duck.ReadOptions{Skip: func(n string) bool { return !need[n] }})
	if err != nil {
		if ctx.Err() != nil {
			return nil, fmt.Errorf("%s: %w", es.fn, err)
		}
		return nil, es.sourceErr(err)
	}
	byName := make(map[string]*duck.ResultColumn, len(res))
	for i := range res {
		byName[res[i].Name] = &res[i]
	}
	rs := &exSourceRows{cols: make([][]float64, len(m.Features)), raw: make([]*duck.ResultColumn, len(m.Features)), ordinal: es.ordinal}
	if len(res) > 0 {
		rs.n = max(len(res[0].Values), len(res[0].Codes))
	}
	changed := fmt.Errorf("%s: source %q changed while it was read; run again", es.fn, es.source)
	for f, fi := range m.Features {
		r := byName[es.feat[f]]
		if r == nil {
			return nil, changed
		}
		rs.raw[f] = r
		col := make([]float64, rs.n)
		text := r.Type.ID == mapping.TypeVarchar || r.Type.ID == mapping.TypeEnum // Codes stays nil without rows
		switch {
		case fi.Kind == forest.Numeric && text:
			return nil, fmt.Errorf("%s: %w: model %s: feature %q is numeric, but source column %q is %v; cast it to a number",
				es.fn, ErrRow, es.label, fi.Name, r.Name, r.Type)
		case fi.Kind == forest.Numeric:
			if err := checkTemporal(es.label, fi.Name, e.FeatureTypes, f, duck.Field{Name: r.Name, Type: r.Type}); err != nil {
				return nil, fmt.Errorf("%s: %w", es.fn, err)
			}
			copy(col, r.Values)
		case text:
			codes := levelCodes(fi.Levels)
			lut := make([]float64, len(r.Levels))
			for j, l := range r.Levels {
				lut[j] = math.NaN() // unseen in training: missing
				if c, ok := codes[l]; ok {
					lut[j] = float64(c)
				}
			}
			for i, c := range r.Codes {
				col[i] = math.NaN()
				if c >= 0 {
					col[i] = lut[c]
				}
			}
		case r.Type.ID == mapping.TypeBoolean:
			codes := levelCodes(fi.Levels)
			var lut [2]float64
			for b, name := range [2]string{"false", "true"} {
				lut[b] = math.NaN()
				if c, ok := codes[name]; ok {
					lut[b] = float64(c)
				}
			}
			for i, x := range r.Values {
				col[i] = math.NaN()
				if x == x {
					col[i] = lut[int(x)]
				}
			}
		default:
			return nil, fmt.Errorf("%s: %w: model %s: feature %q is categorical, but source column %q is %v; cast it to VARCHAR",
				es.fn, ErrRow, es.label, fi.Name, r.Name, r.Type)
		}
		if len(col) != max(len(r.Values), len(r.Codes)) {
			return nil, changed
		}
		rs.cols[f] = col
	}
	if es.key != "" {
		rs.keys = byName[es.key]
		if rs.keys == nil || len(rs.keys.Codes) != rs.n {
			return nil, changed
		}
		if es.keyInt {
			rs.ints = make([]int64, len(rs.keys.Levels))
			for j, l := range rs.keys.Levels {
				v, err := strconv.ParseInt(l, 10, 64)
				if err != nil {
					return nil, changed
				}
				rs.ints[j] = v
			}
		}
	}
	return rs, nil
}

// setKey writes row i's key into column col.
func (rs *exSourceRows) setKey(out *duck.Chunk, col, j, i int) {
	if rs.ordinal {
		out.SetInt64(col, j, int64(i+1))
		return
	}
	c := rs.keys.Codes[i]
	switch {
	case c < 0:
		out.SetNull(col, j)
	case rs.ints != nil:
		out.SetInt64(col, j, rs.ints[c])
	default:
		out.SetString(col, j, rs.keys.Levels[c])
	}
}

// valueText is feature f's input in row i as text: a level as given (also one the model
// never saw), true/false, a date or timestamp as DuckDB prints it (UTC), a number as its
// shortest decimal; ok is false for a missing value.
func (rs *exSourceRows) valueText(f, i int) (string, bool) {
	r := rs.raw[f]
	if r.Codes != nil {
		if c := r.Codes[i]; c >= 0 {
			return r.Levels[c], true
		}
		return "", false
	}
	x := r.Values[i]
	if x != x {
		return "", false
	}
	switch r.Type.ID {
	case mapping.TypeBoolean:
		return strconv.FormatBool(x != 0), true
	case mapping.TypeDate:
		if x == math.Trunc(x) && math.Abs(x) < 1e8 {
			return time.Unix(int64(x)*86400, 0).UTC().Format(time.DateOnly), true
		}
	case mapping.TypeTimestamp, mapping.TypeTimestampS, mapping.TypeTimestampMS, mapping.TypeTimestampNS, mapping.TypeTimestampTZ:
		if math.Abs(x) < 1e12 {
			sec := math.Floor(x)
			t := time.Unix(int64(sec), int64(math.Round((x-sec)*1e6))*1000).UTC()
			return t.Format("2006-01-02 15:04:05.999999"), true
		}
	}
	return numberLabel(x, false), true
}

// explainRows explains rows lo…hi-1 on up to threads goroutines, each with its own
// Explanation and row: keep(e, i) reads row i's explanation and writes only row i's
// results, so the result does not depend on the number of goroutines.
func explainRows(m *forest.Model, cols [][]float64, lo, hi, threads int, keep func(e *forest.Explanation, i int)) error {
	const block = 32 // rows a goroutine takes at a time: enough to amortise the counter
	blocks := (hi - lo + block - 1) / block
	var next atomic.Int64
	var wg sync.WaitGroup
	var once sync.Once
	var first error
	for range min(blocks, max(threads, 1)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			var e forest.Explanation
			row := make([]float64, len(cols))
			for {
				b := int(next.Add(1) - 1)
				if b >= blocks {
					return
				}
				for i := lo + b*block; i < min(hi, lo+(b+1)*block); i++ {
					for f, c := range cols {
						row[f] = c[i]
					}
					if err := m.Explain(row, &e); err != nil {
						once.Do(func() { first = err })
						return
					}
					keep(&e, i)
				}
			}
		}()
	}
	wg.Wait()
	return first
}

// exShownOutputs are the outputs of an explanation that results show: for classification,
// every class, except that two classes show only the second (the positive class, as
// copse_score does); else the single output. names holds each shown output's class, or
// "" (NULL) for a value.
func exShownOutputs(m *forest.Model, outputs []string) (idx []int, names []string) {
	cls := m.Task == forest.Classification
	for k, o := range outputs {
		if cls && len(outputs) == 2 && k == 0 {
			continue
		}
		idx = append(idx, k)
		if cls {
			names = append(names, o)
		} else {
			names = append(names, "")
		}
	}
	return idx, names
}

// explainBatchRows is how many source rows a fill explains before writing them out:
// bounded memory whatever the source's size, and enough rows to keep every thread busy.
const explainBatchRows = 2048

// exEmitRow is one result row of copse_explain or copse_reasons: source row, shown output,
// feature (-1: the baseline) and contribution; rank counts from 1 (reasons).
type exEmitRow struct {
	row, out, feature, rank int32
	contribution            float64
}

// exBatchFill is a fill that explains the source a batch at a time: batch(lo, hi) returns
// the result rows of source rows lo…hi-1, in order; put writes one into the chunk.
func exBatchFill(ctx context.Context, n int, batch func(lo, hi int) ([]exEmitRow, error), put func(out *duck.Chunk, j int, r *exEmitRow)) duck.FillFunc {
	next := 0
	var pending []exEmitRow
	return func(out *duck.Chunk) (int, error) {
		for len(pending) == 0 && next < n {
			if err := ctx.Err(); err != nil {
				return 0, err
			}
			hi := min(n, next+explainBatchRows)
			var err error
			if pending, err = batch(next, hi); err != nil {
				return 0, err
			}
			next = hi
		}
		k := min(out.Capacity(), len(pending))
		for j := range k {
			put(out, j, &pending[j])
		}
		pending = pending[k:]
		return k, nil
	}
}

// exByMagnitude orders feature indexes by |contribution|, largest first; ties keep
// feature order.
func exByMagnitude(order []int32, c []float64) {
	slices.SortStableFunc(order, func(a, b int32) int { return cmp.Compare(math.Abs(c[b]), math.Abs(c[a])) })
}

// bindExplain: copse_explain(model, source, top := k, key := 'column', threads := n) →
// key, output, feature, value, contribution, space. Per source row (in source order)
// and shown output: first the baseline (feature and value NULL, contribution = the
// baseline), then the features by |contribution|, largest first, all of them or the top
// k. baseline + Σ contributions = the model's score in that space.
func (h *Host) bindExplain(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_explain"
	m, e, ctx, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	space, outputs, err := m.ExplainSpace()
	if err != nil {
		return nil, fmt.Errorf("%s: model %q (version %d): %w", fn, e.Name, e.Version, err)
	}
	F := len(m.Features)
	top, ok, err := exWholeOption(fn, call.Named, "top", 1, math.MaxInt32)
	if err != nil {
		return nil, err
	}
	if !ok {
		top = F
	}
	top = min(top, F)
	threads, err := exThreadsOption(fn, call.Named)
	if err != nil {
		return nil, err
	}
	es, err := h.bindSource(ctx, fn, m, e, call.Args[1], call.Named, true)
	if err != nil {
		return nil, err
	}
	shown, names := exShownOutputs(m, outputs)
	connID := call.ConnID
	cols := []duck.Column{es.keyColumn(), {Name: "output", Type: duck.Varchar}, {Name: "feature", Type: duck.Varchar},
		{Name: "value", Type: duck.Varchar}, {Name: "contribution", Type: duck.Double}, {Name: "space", Type: duck.Varchar}}
	return &duck.TableBinding{
		Columns: cols,
		Init: func() (duck.FillFunc, error) {
			ctx := h.contextOf(connID)
			rs, err := es.read(ctx, h, m, e)
			if err != nil {
				return nil, err
			}
			per := len(shown) * (top + 1) // result rows per source row
			batch := func(lo, hi int) ([]exEmitRow, error) {
				res := make([]exEmitRow, (hi-lo)*per)
				err := explainRows(m, rs.cols, lo, hi, threads, func(ex *forest.Explanation, i int) {
					at := res[(i-lo)*per:]
					order := make([]int32, F)
					for s, k := range shown {
						at[0] = exEmitRow{row: int32(i), out: int32(s), feature: -1, contribution: ex.Baseline[k]}
						c := ex.Output(k)
						for f := range order {
							order[f] = int32(f)
						}
						exByMagnitude(order, c)
						for r, f := range order[:top] {
							at[1+r] = exEmitRow{row: int32(i), out: int32(s), feature: f, rank: int32(r + 1), contribution: c[f]}
						}
						at = at[top+1:]
					}
				})
				return res, err
			}
			return exBatchFill(ctx, rs.n, batch, func(out *duck.Chunk, j int, r *exEmitRow) {
				rs.setKey(out, 0, j, int(r.row))
				if names[r.out] == "" {
					out.SetNull(1, j)
				} else {
					out.SetString(1, j, names[r.out])
				}
				if r.feature < 0 {
					out.SetNull(2, j)
					out.SetNull(3, j)
				} else {
					out.SetString(2, j, m.Features[r.feature].Name)
					if v, ok := rs.valueText(int(r.feature), int(r.row)); ok {
						out.SetString(3, j, v)
					} else {
						out.SetNull(3, j)
					}
				}
				out.SetFloat64(4, j, r.contribution)
				out.SetString(5, j, string(space))
			}), nil
		},
	}, nil
}

// Values of copse_reasons' toward := for regression.
const (
	towardHigh = "high"
	towardLow  = "low"
)

// bindReasons: copse_reasons(model, source, top := 4, toward := 'class' | 'high' | 'low',
// key := 'column', threads := n) → key, rank, feature, value, contribution: per source
// row, the up to top features that push its score furthest toward the outcome, rank 1
// first. For a class: the features whose contribution to that class's output (its
// probability, or its raw score in margin space; for a two-class margin model, the
// negated log-odds of the positive class when toward names the other) is above zero,
// largest first. For regression, 'high': contributions above zero, largest first;
// 'low': below zero, most negative first (the contribution stays negative). A row with
// no such feature has no rows.
func (h *Host) bindReasons(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_reasons"
	m, e, ctx, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	space, outputs, err := m.ExplainSpace()
	if err != nil {
		return nil, fmt.Errorf("%s: model %q (version %d): %w", fn, e.Name, e.Version, err)
	}
	top, ok, err := exWholeOption(fn, call.Named, "top", 1, math.MaxInt32)
	if err != nil {
		return nil, err
	}
	if !ok {
		top = 4
	}
	top = min(top, len(m.Features))
	threads, err := exThreadsOption(fn, call.Named)
	if err != nil {
		return nil, err
	}
	toward, given := call.Named["toward"].(string)
	cls := m.Task == forest.Classification
	if !given {
		want := "'high' or 'low'"
		if cls {
			want = "one of the classes " + quoteList(m.Classes)
		}
		return nil, fmt.Errorf("%s: %w: toward := is required: name the outcome the reasons push toward, for model %q (version %d) %s",
			fn, ErrCall, e.Name, e.Version, want)
	}
	// out is the explanation output to read and sign its direction (+1: larger is
	// toward the outcome).
	out, sign := 0, 1.0
	switch {
	case cls:
		k := slices.Index(m.Classes, toward)
		if k < 0 {
			return nil, fmt.Errorf("%s: %w: toward := '%s': model %q (version %d) has no such class; its classes are %s",
				fn, ErrCall, sqlEscape(toward), e.Name, e.Version, quoteList(m.Classes))
		}
		if j := slices.Index(outputs, m.Classes[k]); j >= 0 {
			out = j
		} else if space == forest.SpaceMargin && len(outputs) == 1 && len(m.Classes) == 2 {
			out, sign = 0, -1 // log-odds of the other class
		} else {
			return nil, fmt.Errorf("%s: model %q (version %d): class '%s' has no output in space %q", fn, e.Name, e.Version, sqlEscape(toward), space)
		}
	default:
		switch strings.ToLower(toward) {
		case towardHigh:
		case towardLow:
			sign = -1
		default:
			return nil, fmt.Errorf("%s: %w: toward := '%s': model %q (version %d) predicts a value; want toward := 'high' or 'low'",
				fn, ErrCall, sqlEscape(toward), e.Name, e.Version)
		}
	}
	es, err := h.bindSource(ctx, fn, m, e, call.Args[1], call.Named, true)
	if err != nil {
		return nil, err
	}
	F := len(m.Features)
	connID := call.ConnID
	cols := []duck.Column{es.keyColumn(), {Name: "rank", Type: duck.BigInt}, {Name: "feature", Type: duck.Varchar},
		{Name: "value", Type: duck.Varchar}, {Name: "contribution", Type: duck.Double}}
	return &duck.TableBinding{
		Columns: cols,
		Init: func() (duck.FillFunc, error) {
			ctx := h.contextOf(connID)
			rs, err := es.read(ctx, h, m, e)
			if err != nil {
				return nil, err
			}
			batch := func(lo, hi int) ([]exEmitRow, error) {
				slots := make([]exEmitRow, (hi-lo)*top)
				counts := make([]int, hi-lo)
				err := explainRows(m, rs.cols, lo, hi, threads, func(ex *forest.Explanation, i int) {
					c := ex.Output(out)
					toward := make([]float64, F) // each contribution in the outcome's direction
					order := make([]int32, 0, F)
					for f, v := range c {
						toward[f] = sign * v
						if toward[f] > 0 {
							order = append(order, int32(f))
						}
					}
					slices.SortStableFunc(order, func(a, b int32) int { return cmp.Compare(toward[b], toward[a]) })
					order = order[:min(top, len(order))]
					at := slots[(i-lo)*top:]
					for r, f := range order {
						v := c[f]
						if cls {
							v = toward[f]
						}
						at[r] = exEmitRow{row: int32(i), feature: f, rank: int32(r + 1), contribution: v}
					}
					counts[i-lo] = len(order)
				})
				if err != nil {
					return nil, err
				}
				res := slots[:0]
				for r, k := range counts {
					res = append(res, slots[r*top:r*top+k]...) // never past what it reads
				}
				return res, nil
			}
			return exBatchFill(ctx, rs.n, batch, func(out *duck.Chunk, j int, r *exEmitRow) {
				rs.setKey(out, 0, j, int(r.row))
				out.SetInt64(1, j, int64(r.rank))
				out.SetString(2, j, m.Features[r.feature].Name)
				if v, ok := rs.valueText(int(r.feature), int(r.row)); ok {
					out.SetString(3, j, v)
				} else {
					out.SetNull(3, j)
				}
				out.SetFloat64(4, j, r.contribution)
			}), nil
		},
	}, nil
}

// exMaxPoints bounds copse_dependence's grid: a grid finer than the training bins adds
// nothing (numeric features have at most a few hundred bins).
const exMaxPoints = 10000

// bindDependence: copse_dependence(model, source, feature, points := 20, individual :=
// false, key := 'column', threads := n) → point, feature_value, output,
// average_prediction: the model's mean prediction over the source's rows with the
// feature set to each grid value (forest.Model.DependenceGrid) for all of them. With
// individual := true (which needs key :=): key, point, feature_value, output,
// prediction, average_prediction, one row per source row, grid value and output.
//
// point numbers the grid values 1, 2, … in increasing order. feature_value is always
// VARCHAR: the level name of a categorical feature, else the grid value in the model's
// coding as its shortest decimal (DATE features in days since 1970-01-01, TIMESTAMP in
// seconds), which casts back with ::DOUBLE. output and the predictions follow
// copse_score: the value (output NULL), the positive class's probability for two
// classes, every class's for more (a Poisson model's predictions are per unit of
// exposure).
func (h *Host) bindDependence(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_dependence"
	m, e, ctx, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	name, ok := call.Args[2].(string)
	if !ok {
		return nil, fmt.Errorf("%s: %w: the feature is NULL", fn, ErrCall)
	}
	f := slices.IndexFunc(m.Features, func(fi forest.FeatureInfo) bool { return fi.Name == name })
	if f < 0 {
		f = slices.IndexFunc(m.Features, func(fi forest.FeatureInfo) bool { return strings.EqualFold(fi.Name, name) })
	}
	if f < 0 {
		names := make([]string, len(m.Features))
		for i, fi := range m.Features {
			names[i] = fi.Name
		}
		return nil, fmt.Errorf("%s: %w: model %q (version %d) has no feature %q; its features are %s",
			fn, ErrCall, e.Name, e.Version, name, quotedList(names))
	}
	points, ok, err := exWholeOption(fn, call.Named, "points", 1, exMaxPoints)
	if err != nil {
		return nil, err
	}
	if !ok {
		points = 20
	}
	individual, _ := call.Named["individual"].(bool)
	threads, err := exThreadsOption(fn, call.Named)
	if err != nil {
		return nil, err
	}
	grid, err := m.DependenceGrid(f, points)
	if err != nil {
		return nil, fmt.Errorf("%s: model %q (version %d): %w", fn, e.Name, e.Version, err)
	}
	es, err := h.bindSource(ctx, fn, m, e, call.Args[1], call.Named, individual)
	if err != nil {
		return nil, err
	}
	W := m.Width()
	outputs := []string{m.Target}
	if m.Task == forest.Classification {
		outputs = m.Classes
	}
	shown, names := exShownOutputs(m, outputs)
	gridText := make([]string, len(grid))
	for g, v := range grid {
		if fi := &m.Features[f]; fi.Kind == forest.Categorical {
			gridText[g] = fi.Levels[int(v)]
		} else {
			gridText[g] = numberLabel(v, false)
		}
	}
	cols := []duck.Column{{Name: "point", Type: duck.BigInt}, {Name: "feature_value", Type: duck.Varchar},
		{Name: "output", Type: duck.Varchar}}
	if individual {
		cols = append([]duck.Column{es.keyColumn()}, append(cols, duck.Column{Name: "prediction", Type: duck.Double})...)
	}
	cols = append(cols, duck.Column{Name: "average_prediction", Type: duck.Double})
	connID := call.ConnID
	G, S := len(grid), len(shown)
	return &duck.TableBinding{
		Columns: cols,
		Init: func() (duck.FillFunc, error) {
			var rs *exSourceRows
			mean := make([]float64, G*W)
			var curves []float64
			return onceRows(func() (int, error) {
				ctx := h.contextOf(connID)
				var err error
				if rs, err = es.read(ctx, h, m, e); err != nil {
					return 0, err
				}
				if rs.n == 0 {
					return 0, fmt.Errorf("%s: source %q has no rows to average over", fn, es.source)
				}
				if individual {
					curves = make([]float64, rs.n*G*W)
				}
				if err := m.Dependence(rs.cols, f, grid, mean, curves, threads); err != nil {
					return 0, fmt.Errorf("%s: model %q (version %d): %w", fn, e.Name, e.Version, err)
				}
				if individual {
					return rs.n * G * S, nil
				}
				return G * S, nil
			}, func(out *duck.Chunk, j, r int) {
				s := r % S
				g := (r / S) % G
				c := 0
				if individual {
					rs.setKey(out, 0, j, r/(S*G))
					c = 1
				}
				out.SetInt64(c, j, int64(g+1))
				out.SetString(c+1, j, gridText[g])
				if names[s] == "" {
					out.SetNull(c+2, j)
				} else {
					out.SetString(c+2, j, names[s])
				}
				k := shown[s]
				if individual {
					i := r / (S * G)
					setFloat(out, c+3, j, curves[(i*G+g)*W+k])
					c++
				}
				setFloat(out, c+3, j, mean[g*W+k])
			}), nil
		},
	}, nil
}
