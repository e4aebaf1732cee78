package udf

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"

	"github.com/duckdb/duckdb-go/v2/mapping"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// Scoring errors. Each wraps one of these, so callers can tell a row that does not fit
// its model from a bad call with errors.Is.
var (
	// ErrRow: the row lacks a feature the model needs, or carries it with a type the
	// feature cannot take.
	ErrRow = errors.New("row does not fit the model")
	// ErrCall: the function was called wrongly (wrong argument, a regression model asked
	// for a class, a multiclass model without one).
	ErrCall = errors.New("bad call")
)

// registerScoring registers copse_score, copse_label and copse_predict.
//
// The row is a STRUCT (a table alias or struct_pack); fields feed the model's features by
// name, exact first and then ignoring case, and other fields are ignored. Numeric
// features take any number, BOOLEAN (0/1), DATE (days since 1970-01-01) or TIMESTAMP
// (seconds since then), as copse_train reads them. Categorical features take VARCHAR or
// ENUM (by level name), or BOOLEAN as the levels 'true' and 'false'; a number given to a
// categorical feature is an error rather than a guess at its text (cast it to VARCHAR).
//
// NULL policy: a NULL row, model name or class gives a NULL result; NULL or unseen
// values inside the row are missing values and are scored (each node's default
// direction), never an error.
func (h *Host) registerScoring(conn *sql.Conn) error {
	for _, f := range []duck.ScalarFunc{
		{Name: "copse_score", Args: []duck.Type{duck.Varchar, duck.Any}, Result: duck.Double,
			Bind: func(c duck.ScalarCall) (duck.ScalarExec, error) { return h.bindScore(c, outScore) }},
		{Name: "copse_score", Args: []duck.Type{duck.Varchar, duck.Any, duck.Varchar}, Result: duck.Double,
			Bind: func(c duck.ScalarCall) (duck.ScalarExec, error) { return h.bindScore(c, outScore) }},
		{Name: "copse_label", Args: []duck.Type{duck.Varchar, duck.Any}, Result: duck.Varchar,
			Bind: func(c duck.ScalarCall) (duck.ScalarExec, error) { return h.bindScore(c, outLabel) }},
		{Name: predictSQLFunc, Args: []duck.Type{duck.Varchar, duck.Varchar}, Result: duck.Varchar,
			Bind: h.bindPredictSQL},
	} {
		if err := duck.RegisterScalar(conn, f); err != nil {
			return err
		}
	}
	return h.registerPredict(conn)
}

// outKind is what a scoring function returns.
type outKind int

const (
	outScore outKind = iota // DOUBLE: value, positive-class or named-class probability
	outLabel                // VARCHAR: the predicted class
)

func (k outKind) funcName() string {
	if k == outLabel {
		return "copse_label"
	}
	return "copse_score"
}

// scoreSite is one call site's read-only state: the row layout seen at bind, and either
// the scorer resolved at bind (constant model name) or a per-name cache filled by the
// executors (a model name that is not constant, such as $1 or a column).
type scoreSite struct {
	h    *Host
	fn   string
	kind outKind
	row  duck.TypeInfo
	// connID is the calling connection: a model loads under the context attached to
	// it when the load happens (a prepared statement's bind context is long done by
	// the time EXECUTE runs it).
	connID uint64
	static *scorer
	// class: the 3-argument form. classConst is set when the class is a constant.
	class      bool
	classConst string
	hasConst   bool

	mu   sync.Mutex
	lazy map[string]*lazyScorer
}

type lazyScorer struct {
	s   *scorer
	err error
}

// bindScore binds copse_score(model, row [, class]) and copse_label(model, row). It runs
// once per call site, also for EXPLAIN and prepare: a constant model name is resolved,
// loaded (from the cache) and fitted to the row's fields here, so errors surface before
// any row is read; other names are resolved by the executors, once per name and site.
//
// So 'name' means the version that was latest when the statement was bound, and every
// row of one execution gets that version. A prepared statement is bound again when the
// catalog has changed (catalogChanged) if it reads a table or view of this database;
// one that reads none (only literals, or files through read_parquet and the like) keeps
// the version it was prepared with until it is prepared again: name a version
// ('name@3') to make that explicit.
func (h *Host) bindScore(call duck.ScalarCall, kind outKind) (duck.ScalarExec, error) {
	fn := kind.funcName()
	if n := len(call.Args); n != 2 && n != 3 {
		return nil, fmt.Errorf("%s: %w: expected 2 or 3 arguments, got %d", fn, ErrCall, n)
	}
	row := call.Args[1].Type
	if row.ID != mapping.TypeStruct {
		return nil, fmt.Errorf("%s: %w: the row must be a STRUCT (a table alias such as t in copse_score('m', t), or struct_pack(...)), got %v", fn, ErrCall, row)
	}
	site := &scoreSite{h: h, fn: fn, kind: kind, row: row, connID: call.ConnID, class: len(call.Args) == 3}
	if site.class {
		a := call.Args[2]
		if a.Foldable {
			s, ok := a.Value.(string)
			if !ok {
				return nil, fmt.Errorf("%s: %w: the class (third argument) is NULL", fn, ErrCall)
			}
			site.classConst, site.hasConst = s, true
		}
	}
	if a := call.Args[0]; a.Foldable {
		ref, ok := a.Value.(string)
		if !ok {
			return nil, fmt.Errorf("%s: %w: the model name is NULL", fn, ErrCall)
		}
		s, err := site.newScorer(ref)
		if err != nil {
			return nil, err
		}
		site.static = s
	}
	return site.exec, nil
}

// newScorer loads a model and fits it to the site's row layout.
func (site *scoreSite) newScorer(ref string) (*scorer, error) {
	m, e, err := site.h.loadModel(site.h.contextOf(site.connID), ref)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", site.fn, err)
	}
	s, err := newScorer(m, e, site.row)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", site.fn, err)
	}
	label := s.label
	switch {
	case site.kind == outLabel && m.Task != forest.Classification:
		return nil, fmt.Errorf("%s: %w: model %s is a regression model: it has no class to predict; use copse_score", site.fn, ErrCall, label)
	case site.kind == outScore && site.class && m.Task != forest.Classification:
		return nil, fmt.Errorf("%s: %w: model %s is a regression model: it takes no class argument", site.fn, ErrCall, label)
	case site.kind == outScore && !site.class && m.Task == forest.Classification && len(m.Classes) > 2:
		return nil, fmt.Errorf("%s: %w: model %s has %d classes (%s): name one as the third argument, e.g. copse_score('%s', row, '%s')",
			site.fn, ErrCall, label, len(m.Classes), quoteList(m.Classes), sqlEscape(ref), sqlEscape(m.Classes[0]))
	}
	if site.hasConst {
		k, err := s.classIndex(site.classConst)
		if err != nil {
			return nil, fmt.Errorf("%s: %w", site.fn, err)
		}
		s.fixedClass = k
	}
	return s, nil
}

// scorerFor returns the scorer for a model name read from the input, building it once
// per name and call site (failures too, so a bad name costs one catalog query). name
// may be borrowed. Other executors wait while a model loads: they would need it too.
func (site *scoreSite) scorerFor(name string) (*scorer, error) {
	site.mu.Lock()
	defer site.mu.Unlock()
	if l, ok := site.lazy[name]; ok {
		return l.s, l.err
	}
	if site.lazy == nil {
		site.lazy = map[string]*lazyScorer{}
	}
	name = strings.Clone(name)
	s, err := site.newScorer(name)
	site.lazy[name] = &lazyScorer{s, err}
	return s, err
}

// exec scores one chunk. With a constant model name the whole chunk goes through one
// scorer; otherwise the rows are grouped by the model they name (nearly always one).
func (site *scoreSite) exec(in *duck.ScalarInput, out *duck.ScalarOutput) error {
	if site.static != nil {
		return site.static.run(site, in, out, nil, nil)
	}
	names := in.Arg(0)
	first, found, mixed := "", false, false
	for i := range in.Len() {
		s, ok := names.String(i)
		if !ok {
			continue
		}
		if !found {
			first, found = s, true
		} else if s != first {
			mixed = true
			break
		}
	}
	if !found {
		for i := range in.Len() {
			out.SetNull(i)
		}
		return nil
	}
	if !mixed {
		s, err := site.scorerFor(first)
		if err != nil {
			return err
		}
		return s.run(site, in, out, nil, &names)
	}
	return site.execMixed(in, out, names)
}

// execMixed scores a chunk whose rows name different models, one group at a time. It
// allocates per chunk; a model name that changes from row to row is rare.
func (site *scoreSite) execMixed(in *duck.ScalarInput, out *duck.ScalarOutput, names duck.Vec) error {
	groups := map[string][]int32{}
	var order []string
	for i := range in.Len() {
		s, ok := names.String(i)
		if !ok {
			out.SetNull(i)
			continue
		}
		g, seen := groups[s]
		if !seen {
			s = strings.Clone(s)
			order = append(order, s)
		}
		groups[s] = append(g, int32(i))
	}
	for _, name := range order {
		s, err := site.scorerFor(name)
		if err != nil {
			return err
		}
		if err := s.run(site, in, out, groups[name], nil); err != nil {
			return err
		}
	}
	return nil
}

// quoteList spells names as SQL string literals separated by commas.
func quoteList(names []string) string {
	q := make([]string, len(names))
	for i, s := range names {
		q[i] = "'" + sqlEscape(s) + "'"
	}
	return strings.Join(q, ", ")
}

// sqlEscape doubles single quotes so s can sit inside a SQL string literal.
func sqlEscape(s string) string { return strings.ReplaceAll(s, "'", "''") }

// inputKind is how one struct field turns into a feature value in model coding.
type inputKind uint8

const (
	inNumber    inputKind = iota // numeric field: converted as copse_train reads it
	inText                       // VARCHAR field of a categorical feature: level lookup
	inBoolLevel                  // BOOLEAN field of a categorical feature: levels 'true'/'false'
	inEnum                       // ENUM field of a categorical feature: dictionary → level code
	inNull                       // field of DuckDB's NULL type (a bare NULL in struct_pack): missing
)

// input feeds one model feature from one struct field.
type input struct {
	field  int
	used   bool // some split reads the feature; unused ones are never converted
	kind   inputKind
	levels map[string]int32 // inText: level name → code
	bools  [2]float64       // inBoolLevel: codes of 'false' and 'true' (NaN: unseen)
	enum   []float64        // inEnum: level code of each dictionary entry (NaN: unseen)
}

// scorer is a model fitted to one row layout. It is read-only once built, so DuckDB's
// threads share it; each call takes its scratch space from scratchPool.
type scorer struct {
	model    *forest.Model
	label    string // name@version, for messages
	inputs   []input
	classIdx map[string]int
	// fixedClass is the class copse_score returns, or -1 when a non-constant third
	// argument names it per row.
	fixedClass int
	// exposure is the row field holding the exposure of a Poisson model trained with
	// one, or -1: the prediction, a rate per unit of exposure, is multiplied by it.
	exposure int
}

// scratchPool holds executor scratch for every scorer. One pool, not one per scorer: a
// pool lives on for two garbage collections after its last use, and a statement that
// scores a few rows binds a scorer of its own, so per-scorer pools kept hundreds of MB
// of idle scratch in a server answering small queries (and the heap grew with them).
var scratchPool = sync.Pool{New: func() any { return new(scratch) }}

// scratch is one executor call's working memory, grown to the chunks it has seen.
type scratch struct {
	block  []float64 // row-major rows in model coding
	col    []float64 // one converted input column
	codes  []int32   // one ENUM input column
	leaves []int32
	pred   []float64 // Width numbers per row
}

// fit makes room for a chunk of n rows of p features and W outputs.
func (sc *scratch) fit(n, p, W int) {
	sc.block = room(sc.block, n*p)
	sc.col = room(sc.col, n)
	sc.codes = room(sc.codes, n)
	sc.leaves = room(sc.leaves, n)
	sc.pred = room(sc.pred, n*W)
}

// room returns s with length k, reallocated when its capacity is short.
func room[T any](s []T, k int) []T {
	if cap(s) < k {
		return make([]T, k)
	}
	return s[:k]
}

// checkTemporal refuses a DATE field for a feature trained from a TIMESTAMP column, and
// the reverse: one counts days, the other seconds. Without a recorded kind (models saved
// before kinds were recorded) anything numeric goes, as before.
func checkTemporal(label, feature string, kinds []string, fi int, f duck.Field) error {
	if fi >= len(kinds) {
		return nil
	}
	var given, cast string
	switch f.Type.ID {
	case mapping.TypeDate:
		given, cast = featDate, "TIMESTAMP"
	case mapping.TypeTimestamp, mapping.TypeTimestampS, mapping.TypeTimestampMS, mapping.TypeTimestampNS, mapping.TypeTimestampTZ:
		given, cast = featTimestamp, "DATE"
	default:
		return nil
	}
	trained := kinds[fi]
	if (trained != featDate && trained != featTimestamp) || trained == given {
		return nil
	}
	return fmt.Errorf("%w: model %s: feature %q was trained from a %s column (%s), but row field %q is %v; cast it, e.g. CAST(%s AS %s)",
		ErrRow, label, feature, strings.ToUpper(trained), map[string]string{featDate: "days", featTimestamp: "seconds"}[trained],
		f.Name, f.Type, quoteIdent(f.Name), cast)
}

// newScorer maps the row's fields to the model's features: by exact name first, then
// ignoring case; other fields are ignored.
func newScorer(m *forest.Model, e Entry, row duck.TypeInfo) (*scorer, error) {
	s := &scorer{model: m, label: fmt.Sprintf("%q (version %d)", e.Name, e.Version), inputs: make([]input, len(m.Features)),
		fixedClass: -1, exposure: -1}
	used := make([]bool, len(m.Features))
	for _, t := range m.Trees {
		for i := range t.Nodes {
			if n := &t.Nodes[i]; !n.IsLeaf() {
				used[n.Feature] = true
			}
		}
	}
	if m.Blend != nil {
		// A blend's members use its features in their own ways: read every one.
		for f := range used {
			used[f] = true
		}
	}
	if l := m.Linear; l != nil {
		for _, t := range l.Terms {
			if t.Kind != forest.TermIntercept {
				used[t.Feature] = true
			}
		}
	}
	exact := make(map[string]int, len(row.Fields))
	folded := make(map[string][]int, len(row.Fields))
	for i, f := range row.Fields {
		if _, dup := exact[f.Name]; !dup {
			exact[f.Name] = i
		}
		k := strings.ToLower(f.Name)
		folded[k] = append(folded[k], i)
	}
	for fi, feat := range m.Features {
		idx, ok := exact[feat.Name]
		if !ok {
			// DuckDB keeps struct field names unique ignoring case, so at most one matches.
			c := folded[strings.ToLower(feat.Name)]
			if len(c) == 0 {
				return nil, fmt.Errorf("%w: model %s needs feature %q, which the row lacks (row fields: %s)",
					ErrRow, s.label, feat.Name, fieldList(row))
			}
			idx = c[0]
		}
		f := row.Fields[idx]
		in := input{field: idx, used: used[fi]}
		switch {
		case f.Type.ID == mapping.TypeSQLNull:
			in.kind = inNull // every value NULL: missing, as the NULL policy says
		case feat.Kind == forest.Numeric && f.Type.Numeric():
			if err := checkTemporal(s.label, feat.Name, e.FeatureTypes, fi, f); err != nil {
				return nil, err
			}
			in.kind = inNumber
		case feat.Kind == forest.Categorical && f.Type.ID == mapping.TypeVarchar:
			in.kind = inText
			in.levels = levelCodes(feat.Levels)
		case feat.Kind == forest.Categorical && f.Type.ID == mapping.TypeEnum:
			in.kind = inEnum
			codes := levelCodes(feat.Levels)
			in.enum = make([]float64, len(f.Type.Levels))
			for d, name := range f.Type.Levels {
				in.enum[d] = math.NaN()
				if c, ok := codes[name]; ok {
					in.enum[d] = float64(c)
				}
			}
		case feat.Kind == forest.Categorical && f.Type.ID == mapping.TypeBoolean:
			in.kind = inBoolLevel
			codes := levelCodes(feat.Levels)
			for b, name := range [2]string{"false", "true"} {
				in.bools[b] = math.NaN()
				if c, ok := codes[name]; ok {
					in.bools[b] = float64(c)
				}
			}
		case feat.Kind == forest.Numeric:
			return nil, fmt.Errorf("%w: model %s: feature %q is numeric, but row field %q is %v; cast it to a number",
				ErrRow, s.label, feat.Name, f.Name, f.Type)
		default:
			return nil, fmt.Errorf("%w: model %s: feature %q is categorical, but row field %q is %v; cast it to VARCHAR",
				ErrRow, s.label, feat.Name, f.Name, f.Type)
		}
		s.inputs[fi] = in
	}
	if name := m.Params.Exposure; name != "" {
		idx, ok := exact[name]
		if !ok {
			c := folded[strings.ToLower(name)]
			if len(c) == 0 {
				return nil, fmt.Errorf("%w: model %s needs exposure %q, which the row lacks (row fields: %s)",
					ErrRow, s.label, name, fieldList(row))
			}
			idx = c[0]
		}
		if f := row.Fields[idx]; !f.Type.Numeric() {
			return nil, fmt.Errorf("%w: model %s: exposure %q is %v in the row; cast it to a number", ErrRow, s.label, name, f.Type)
		}
		s.exposure = idx
	}
	if m.Task == forest.Classification {
		s.classIdx = make(map[string]int, len(m.Classes))
		for k, c := range m.Classes {
			s.classIdx[c] = k
		}
	}
	return s, nil
}

func levelCodes(levels []string) map[string]int32 {
	codes := make(map[string]int32, len(levels))
	for c, l := range levels {
		codes[l] = int32(c)
	}
	return codes
}

// fieldList names a struct's fields for an error message, at most 20 of them.
func fieldList(row duck.TypeInfo) string {
	const most = 20
	names := make([]string, 0, min(len(row.Fields), most))
	for i, f := range row.Fields {
		if i == most {
			names = append(names, fmt.Sprintf("… %d more", len(row.Fields)-most))
			break
		}
		names = append(names, fmt.Sprintf("%q", f.Name))
	}
	if len(names) == 0 {
		return "none"
	}
	return strings.Join(names, ", ")
}

// classIndex finds a class by name; unknown names are an error listing the classes.
func (s *scorer) classIndex(name string) (int, error) {
	if k, ok := s.classIdx[name]; ok {
		return k, nil
	}
	return 0, fmt.Errorf("%w: model %s has no class '%s'; its classes are %s", ErrCall, s.label, sqlEscape(name), quoteList(s.model.Classes))
}

// run scores the rows sel of a chunk (nil: all) and writes their results. names, when
// not nil, is the model-name argument: rows where it is NULL get NULL.
func (s *scorer) run(site *scoreSite, in *duck.ScalarInput, out *duck.ScalarOutput, sel []int32, names *duck.Vec) error {
	n := in.Len()
	rows := n
	if sel != nil {
		rows = len(sel)
	}
	m := s.model
	p, W := len(m.Features), m.Width()
	sc := scratchPool.Get().(*scratch)
	defer scratchPool.Put(sc)
	sc.fit(n, p, W)
	block := sc.block[:rows*p]
	for f := range s.inputs {
		inp := &s.inputs[f]
		if !inp.used {
			continue // tree walks never read it: its block cells may hold anything
		}
		v := in.Field(1, inp.field)
		switch inp.kind {
		case inNull:
			for j := range rows {
				block[j*p+f] = math.NaN()
			}
		case inNumber, inBoolLevel:
			col := sc.col[:n]
			if err := v.Float64s(col); err != nil {
				return fmt.Errorf("%s: model %s: feature %q: %w", site.fn, s.label, m.Features[f].Name, err)
			}
			if inp.kind == inBoolLevel {
				for i, x := range col {
					if x == x {
						col[i] = inp.bools[int(x)]
					}
				}
			}
			if sel == nil {
				for i, x := range col {
					block[i*p+f] = x
				}
			} else {
				for j, i := range sel {
					block[j*p+f] = col[i]
				}
			}
		case inEnum:
			codes := sc.codes[:n]
			if err := v.EnumCodes(codes); err != nil {
				return fmt.Errorf("%s: model %s: feature %q: %w", site.fn, s.label, m.Features[f].Name, err)
			}
			for j := range rows {
				i := j
				if sel != nil {
					i = int(sel[j])
				}
				x := math.NaN()
				if c := codes[i]; c >= 0 {
					x = inp.enum[c]
				}
				block[j*p+f] = x
			}
		case inText:
			for j := range rows {
				i := j
				if sel != nil {
					i = int(sel[j])
				}
				x := math.NaN() // NULL and unseen levels are missing
				if str, ok := v.String(i); ok {
					if c, ok := inp.levels[str]; ok { // borrowed key: no allocation
						x = float64(c)
					}
				}
				block[j*p+f] = x
			}
		}
	}
	pred := sc.pred[:rows*W]
	m.PredictBlock(block, p, pred, sc.leaves[:rows])
	var expNull []bool // rows whose exposure is NULL score NULL
	if s.exposure >= 0 {
		col := sc.col[:n]
		if err := in.Field(1, s.exposure).Float64s(col); err != nil {
			return fmt.Errorf("%s: model %s: exposure %q: %w", site.fn, s.label, m.Params.Exposure, err)
		}
		for j := range rows {
			i := j
			if sel != nil {
				i = int(sel[j])
			}
			switch e := col[i]; {
			case e != e:
				if expNull == nil {
					expNull = make([]bool, rows)
				}
				expNull[j] = true
			case !(e > 0) || math.IsInf(e, 0):
				return fmt.Errorf("%s: model %s: exposure %q is %v; want a finite number above 0", site.fn, s.label, m.Params.Exposure, e)
			default:
				pred[j] *= e // W is 1: a Poisson model predicts one number
			}
		}
	}

	rowVec := in.Arg(1)
	var classes duck.Vec
	perRowClass := site.class && !site.hasConst
	if perRowClass {
		classes = in.Arg(2)
	}
	var res []float64
	if site.kind == outScore {
		res = out.Float64s()
	}
	for j := range rows {
		i := j
		if sel != nil {
			i = int(sel[j])
		}
		if !rowVec.Valid(i) || (names != nil && !names.Valid(i)) || (expNull != nil && expNull[j]) {
			out.SetNull(i)
			continue
		}
		pr := pred[j*W : (j+1)*W]
		if site.kind == outLabel {
			out.SetString(i, m.Classes[forest.Class(pr)])
			continue
		}
		k := s.fixedClass
		if k < 0 {
			switch {
			case perRowClass:
				name, ok := classes.String(i)
				if !ok {
					out.SetNull(i)
					continue
				}
				var err error
				if k, err = s.classIndex(name); err != nil {
					return fmt.Errorf("%s: %w", site.fn, err)
				}
			case W == 2:
				k = 1 // binary: the positive class
			default:
				k = 0 // regression: the value
			}
		}
		res[i] = pr[k]
	}
	return nil
}

// copse_predict is a table macro over DuckDB's query() table function: a scalar helper
// turns (model, source) into a SELECT that passes every source column through with its
// own type and appends the prediction columns computed by copse_label and copse_score.
// Being a plain subquery of the caller's statement, it reads the caller's TEMP tables
// and uncommitted rows, streams, and runs on DuckDB's threads.
const (
	predictSQLFunc = "copse_predict_sql"
	predictAlias   = "copse_row" // the source in the FROM clause
	// predictRow is the source row as a STRUCT, built from the columns themselves: a
	// table alias used as the row would lose to a source column of the same name.
	predictRow = "struct_pack(*COLUMNS(*))"
)

// registerPredict creates the copse_predict macro in the database's main schema. DuckDB
// keeps macros in its catalog (a file database stores it); CREATE OR REPLACE keeps that
// current with this build.
func (h *Host) registerPredict(conn *sql.Conn) error {
	if readOnly(context.Background(), conn) {
		return nil // a read-only database keeps the macro it was given when written
	}
	_, err := conn.ExecContext(context.Background(), `CREATE OR REPLACE MACRO copse_predict(model, source) AS TABLE
		FROM query(`+predictSQLFunc+`(model, source))`)
	if err != nil {
		return fmt.Errorf("create copse_predict: %w", err)
	}
	return nil
}

// bindPredictSQL binds the helper; query() itself insists on constant arguments.
func (h *Host) bindPredictSQL(call duck.ScalarCall) (duck.ScalarExec, error) {
	const fn = "copse_predict"
	if len(call.Args) != 2 {
		return nil, fmt.Errorf("%s: %w: expected 2 arguments, got %d", fn, ErrCall, len(call.Args))
	}
	connID := call.ConnID
	return func(in *duck.ScalarInput, out *duck.ScalarOutput) error {
		ctx := h.contextOf(connID) // the running statement's, not the bind's
		refs, srcs := in.Arg(0), in.Arg(1)
		for i := range in.Len() {
			ref, ok1 := refs.String(i)
			src, ok2 := srcs.String(i)
			if !ok1 || !ok2 {
				return fmt.Errorf("%s: %w: the model and the source must not be NULL", fn, ErrCall)
			}
			q, err := h.predictQuery(ctx, ref, src)
			if err != nil {
				return fmt.Errorf("%s: %w", fn, err)
			}
			out.SetString(i, q)
		}
		return nil
	}, nil
}

// predictQuery writes the SELECT behind copse_predict. The model is pinned to the version
// the reference names now, so every column of one result comes from the same model.
func (h *Host) predictQuery(ctx context.Context, ref, source string) (string, error) {
	m, e, err := h.loadModel(ctx, ref)
	if err != nil {
		return "", err
	}
	src := strings.TrimSpace(source)
	if src == "" {
		return "", fmt.Errorf("%w: the source is empty: give a table or view name, a table function call or a SELECT", ErrCall)
	}
	from := src + " AS " + predictAlias
	if isQuery(skipComments(src)) {
		// As in copse_train: a final semicolon is dropped, and the query sits on lines
		// of its own so that a trailing "--" comment cannot swallow the parenthesis.
		from = "(\n" + strings.TrimRight(src, "; \t\r\n") + "\n) AS " + predictAlias
	}
	model := "'" + sqlEscape(fmt.Sprintf("%s@%d", e.Name, e.Version)) + "'"
	row := predictRow
	var b strings.Builder
	// The FROM clause holds the source alone, so * and COLUMNS(*) are its columns; a
	// star qualified by the alias could name a STRUCT column called copse_row instead.
	b.WriteString("SELECT *, ")
	switch {
	case m.Task != forest.Classification:
		b.WriteString("copse_score(" + model + ", " + row + ") AS prediction")
	case len(m.Classes) == 2:
		b.WriteString("copse_label(" + model + ", " + row + ") AS prediction, copse_score(" + model + ", " + row + ") AS probability")
	default:
		b.WriteString("copse_label(" + model + ", " + row + ") AS prediction, MAP([" + quoteList(m.Classes) + "], [")
		for k, c := range m.Classes {
			if k > 0 {
				b.WriteString(", ")
			}
			b.WriteString("copse_score(" + model + ", " + row + ", '" + sqlEscape(c) + "')")
		}
		b.WriteString("]) AS probabilities")
	}
	b.WriteString(" FROM " + from)
	return b.String(), nil
}

// isQuery tells a query (SELECT, WITH, FROM-first, VALUES, …) from a table name or a
// table function call.
func isQuery(src string) bool {
	if strings.HasPrefix(src, "(") {
		return true
	}
	word := src
	if i := strings.IndexFunc(src, func(r rune) bool { return !(r == '_' || r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z') }); i >= 0 {
		word = src[:i]
	}
	switch strings.ToUpper(word) {
	case "SELECT", "WITH", "FROM", "VALUES", "TABLE", "PIVOT", "UNPIVOT", "SUMMARIZE", "DESCRIBE", "SHOW":
		return true
	}
	return false
}
