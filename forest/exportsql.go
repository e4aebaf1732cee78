package forest

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Exporting a model as SQL: one SELECT over a named input relation that computes what
// the host's scoring computes, so a model can score rows where copse is not installed.
//
// Shape of the text (a chain of common table expressions):
//
//	copse_stage_0   the input: key columns renamed k0…, numeric features cast to DOUBLE
//	                PRECISION (f0…), categorical ones as text, the exposure (e)
//	copse_stage_1…  up to exportTreesPerStage trees each, one column per tree (t0…), and
//	                the running sums (s0…) of the previous stage's trees
//	copse_stage_N…  links and combinations (p0…), one layer per stage
//	final SELECT    the key columns under their own names and the score column(s)
//
// Why stages: engines limit how deep one expression may nest and how many columns one
// SELECT may list. Measured (DuckDB 1.5 through duckdb-go, PostgreSQL 15.18): DuckDB's
// max_expression_depth is 1000 by default, and a chain of nested CASEs 990 deep runs
// while one 1500 deep fails ("Max expression depth limit of 1000 exceeded"); PostgreSQL
// runs both. From memory, not measured: a PostgreSQL target list holds at most 1664
// entries, and its parser's recursion is bounded by max_stack_depth (2MB by default).
// So a stage lists at most exportTreesPerStage tree columns and every sum adds at most
// that many terms (plus as many feature-only terms); each tree is one nested CASE as
// deep as the tree, and a tree deeper than exportMaxDepth is refused with an error
// rather than left to fail in the engine.
//
// Exactness: numbers are written as the shortest decimal that reads back as the same
// double (strconv 'g', -1), in E-notation, which ANSI SQL and DuckDB read as an
// approximate (double) literal; PostgreSQL reads it as NUMERIC, so there every value
// used in arithmetic is cast to DOUBLE PRECISION (NUMERIC → DOUBLE PRECISION rounds
// correctly, so the double is the one written). Sums run in the engine's order, so the
// result equals the host's scores up to the engine's EXP.

// SQLDialect names the SQL spelling of an export.
type SQLDialect string

// The dialects.
const (
	// DialectStandard uses only ANSI constructs: CASE, COALESCE, NULLIF, EXP, CAST,
	// arithmetic, IN lists, IS NULL. Categorical inputs must be character columns and
	// NaN is not read as missing (ANSI has no NaN).
	DialectStandard SQLDialect = "standard"
	// DialectDuckDB: as standard, plus NaN read as missing, categorical inputs cast to
	// VARCHAR (ENUM and BOOLEAN columns work) and GREATEST for the softmax.
	DialectDuckDB SQLDialect = "duckdb"
	// DialectPostgres: as DuckDB, plus literals in arithmetic cast to DOUBLE PRECISION
	// (PostgreSQL types E-notation literals NUMERIC).
	DialectPostgres SQLDialect = "postgres"
)

// SQLDialects lists the dialects, for messages.
var SQLDialects = []SQLDialect{DialectStandard, DialectDuckDB, DialectPostgres}

// SQLOptions controls ExportSQL.
type SQLOptions struct {
	Dialect SQLDialect // "" is DialectStandard
	// Relation is the input table or view: an identifier, or schema.name (each
	// dot-separated part is quoted). "" is DefaultSQLRelation.
	Relation string
	// Keys are input columns carried to the output in front of the score, unchanged.
	Keys []string
	// Class, on classification models, names the class whose probability is the score.
	// "" means the second class with two classes and one column per class (named after
	// the class) with more, as the host's scoring takes a class argument for them.
	Class string
	// Column names the score column; "" is "score".
	Column string
	// Title is written into the header comment (such as the model's name and version).
	Title string
}

// DefaultSQLRelation is the input relation's name when SQLOptions.Relation is empty.
const DefaultSQLRelation = "input_rows"

// exportTreesPerStage caps the tree columns of one stage and the terms of one sum; see
// the comment at the top of the file.
const exportTreesPerStage = 100

// exportMaxDepth caps a tree's depth: every level nests one CASE, and DuckDB refuses
// nesting past 1000 (measured: 990 levels run, 1500 fail); the margin leaves room for
// the cast and sum around a tree.
const exportMaxDepth = 900

// exportExpLimit guards EXP: PostgreSQL raises an error when EXP overflows or
// underflows, where Go returns +Inf or 0. Below −700, e^x < 1e−304, so writing 0 (or 1
// for the logistic of x > 700) differs from the engine's value by less than 1e−300.
const exportExpLimit = 700

// ExportSQL writes the model as a SELECT over opt.Relation that returns, per input row,
// the key columns and the score(s) the host's scoring returns: the value (times the
// exposure for a Poisson model trained with one), the probability of opt.Class (default
// the second class of two), or with more classes and no opt.Class one column per class.
// Input columns are read by the feature names as stored (quoted, so case matters);
// numeric inputs must be numbers (a DATE or TIMESTAMP feature needs its days or seconds
// since 1970-01-01 supplied as a number); NULL and levels unseen in training are missing
// values, which follow each node's default direction as in scoring.
func (m *Model) ExportSQL(opt SQLOptions) (string, error) {
	if opt.Dialect == "" {
		opt.Dialect = DialectStandard
	}
	switch opt.Dialect {
	case DialectStandard, DialectDuckDB, DialectPostgres:
	default:
		return "", fmt.Errorf("forest: export sql: dialect %q: want one of %q", opt.Dialect, SQLDialects)
	}
	if opt.Relation == "" {
		opt.Relation = DefaultSQLRelation
	}
	if opt.Column == "" {
		opt.Column = "score"
	}
	if err := m.checkExportable(); err != nil {
		return "", fmt.Errorf("forest: export sql: %w", err)
	}
	x := &sqlExport{d: opt.Dialect}
	need, names, err := m.exportOutputs(opt)
	if err != nil {
		return "", fmt.Errorf("forest: export sql: %w", err)
	}
	rel, err := sqlRelation(opt.Relation)
	if err != nil {
		return "", fmt.Errorf("forest: export sql: relation %q: %w", opt.Relation, err)
	}
	seen := map[string]bool{}
	for _, n := range names {
		seen[n] = true
	}
	for _, k := range opt.Keys {
		if k == "" || strings.ContainsRune(k, 0) {
			return "", fmt.Errorf("forest: export sql: key column %q: want a non-empty name without NUL", k)
		}
		if seen[k] {
			return "", fmt.Errorf("forest: export sql: key column %q: the output already has a column of that name (set the score column's name)", k)
		}
		seen[k] = true
	}
	feat := make([]string, len(m.Features))
	for i, f := range m.Features {
		if f.Name == "" || strings.ContainsRune(f.Name, 0) {
			return "", fmt.Errorf("forest: export sql: feature %d has the name %q, which SQL cannot quote", i, f.Name)
		}
		feat[i] = "f" + strconv.Itoa(i)
	}
	x.in = append(x.in, m.exportInputs(x, opt.Keys)...)
	outs, err := x.model(m, feat, need)
	if err != nil {
		return "", fmt.Errorf("forest: export sql: %w", err)
	}
	if x.err != nil {
		return "", fmt.Errorf("forest: export sql: %w", x.err)
	}
	final := make([]string, 0, len(opt.Keys)+len(names))
	for i, k := range opt.Keys {
		final = append(final, "k"+strconv.Itoa(i)+" AS "+quoteSQLIdent(k))
	}
	j := 0
	for k, col := range outs {
		if !need[k] {
			continue
		}
		if m.Params.Exposure != "" {
			// The host multiplies the rate by the exposure; a NULL exposure scores NULL.
			col = col + " * e"
		}
		final = append(final, col+" AS "+quoteSQLIdent(names[j]))
		j++
	}
	return x.text(m, opt, rel, final), nil
}

// checkExportable reports what a model lacks for export, naming it.
func (m *Model) checkExportable() error {
	switch {
	case m.Blend != nil:
		for j, mem := range m.Blend.Members {
			if err := mem.checkExportable(); err != nil {
				return fmt.Errorf("blend member %q: %w", m.Blend.Names[j], err)
			}
		}
		return nil
	case m.Linear != nil:
		return nil
	case len(m.Trees) == 0:
		return fmt.Errorf("model of method %q has no trees, linear terms or blend members to write", m.Method)
	}
	if m.Boost != nil {
		switch m.Boost.Loss {
		case LossSquared, LossAbsolute, LossHuber, LossQuantile, LossLogistic, LossMultinomial, LossPoisson:
		default:
			return fmt.Errorf("boosting loss %q has no SQL link", m.Boost.Loss)
		}
	}
	for ti, t := range m.Trees {
		if d := t.Depth(); d > exportMaxDepth {
			return fmt.Errorf("tree %d is %d levels deep; SQL engines refuse expressions nested that deep (at most %d levels are written)", ti+1, d, exportMaxDepth)
		}
	}
	return nil
}

// exportOutputs picks the prediction components the export returns and their columns.
func (m *Model) exportOutputs(opt SQLOptions) (need []bool, names []string, err error) {
	need = make([]bool, m.Width())
	if m.Task != Classification {
		if opt.Class != "" {
			return nil, nil, fmt.Errorf("class %q: the model is a regression model and has no classes", opt.Class)
		}
		need[0] = true
		return need, []string{opt.Column}, nil
	}
	if opt.Class != "" {
		for k, c := range m.Classes {
			if c == opt.Class {
				need[k] = true
				return need, []string{opt.Column}, nil
			}
		}
		return nil, nil, fmt.Errorf("class %q: the model's classes are %q", opt.Class, m.Classes)
	}
	if len(m.Classes) == 2 {
		need[1] = true
		return need, []string{opt.Column}, nil
	}
	for k, c := range m.Classes {
		if c == "" || strings.ContainsRune(c, 0) {
			return nil, nil, fmt.Errorf("class %q cannot name a column; name a class to score", c)
		}
		need[k] = true
		names = append(names, c)
	}
	return need, names, nil
}

// exportInputs writes the input stage's columns: keys, features, exposure.
func (m *Model) exportInputs(x *sqlExport, keys []string) []string {
	var cols []string
	for i, k := range keys {
		cols = append(cols, quoteSQLIdent(k)+" AS k"+strconv.Itoa(i))
	}
	x.carry = make([]string, 0, len(keys)+len(m.Features)+1)
	for i := range keys {
		x.carry = append(x.carry, "k"+strconv.Itoa(i))
	}
	for i, f := range m.Features {
		col := quoteSQLIdent(f.Name)
		if f.Kind == Numeric {
			col = "CAST(" + col + " AS DOUBLE PRECISION)"
			if x.d != DialectStandard {
				// Not ANSI: NaN, which scoring reads as missing, becomes NULL.
				col = "NULLIF(" + col + ", CAST('NaN' AS DOUBLE PRECISION))"
			}
		} else if x.d != DialectStandard {
			// Not ANSI (VARCHAR without a length): ENUM and BOOLEAN columns compare as
			// their level names, as scoring reads them.
			col = "CAST(" + col + " AS VARCHAR)"
		}
		cols = append(cols, col+" AS f"+strconv.Itoa(i))
		x.carry = append(x.carry, "f"+strconv.Itoa(i))
	}
	if e := m.Params.Exposure; e != "" {
		cols = append(cols, "CAST("+quoteSQLIdent(e)+" AS DOUBLE PRECISION) AS e")
		x.carry = append(x.carry, "e")
	}
	x.keys = len(keys)
	return cols
}

// sqlExport gathers the parts of one export.
type sqlExport struct {
	d     SQLDialect
	in    []string   // the input stage's select list
	carry []string   // columns every tree stage passes on: keys, features, exposure
	keys  int        // how many of carry are keys
	trees []string   // one expression per tree column t<i>
	slots []sqlSlot  // running sums, s<i>
	post  [][]string // after the sums: layers of "expr AS p<i>"
	npost int
	// postLevel is the layer each post column was defined in.
	postLevel map[string]int
	cur       *Model // the model (or blend member) whose trees are being written
	err       error  // the first number that SQL cannot write
}

// sqlSlot is one running sum: terms added in order, each available once its tree column
// (tree ≥ 0) exists; tree −1 terms read only features.
type sqlSlot struct {
	terms []sqlTerm
}

type sqlTerm struct {
	tree int
	expr string
}

// lit writes a double for use in arithmetic.
func (x *sqlExport) lit(v float64) string {
	s := x.num(v)
	if x.d == DialectPostgres {
		return "CAST(" + s + " AS DOUBLE PRECISION)"
	}
	return s
}

// num writes a double as the shortest E-notation literal that reads back as the same
// double; SQL has no literal for infinities or NaN, so those are recorded as an error.
func (x *sqlExport) num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		if x.err == nil {
			x.err = fmt.Errorf("the model holds the number %v, which SQL cannot write", v)
		}
		return "NULL"
	}
	s := strconv.FormatFloat(v, 'g', -1, 64)
	if strings.ContainsAny(s, "e") {
		return strings.Replace(s, "e", "E", 1)
	}
	return s + "E0"
}

// addTree adds a tree column and returns its name.
func (x *sqlExport) addTree(expr string) string {
	x.trees = append(x.trees, expr)
	return "t" + strconv.Itoa(len(x.trees)-1)
}

// addSlot adds a running sum and returns its name.
func (x *sqlExport) addSlot(terms []sqlTerm) string {
	x.slots = append(x.slots, sqlSlot{terms: terms})
	return "s" + strconv.Itoa(len(x.slots)-1)
}

// addPost adds a column computed after the sums from the named columns (slots and
// earlier post columns) and returns its name.
func (x *sqlExport) addPost(expr string, uses ...string) string {
	level := 0
	for _, u := range uses {
		if l, ok := x.postLevel[u]; ok {
			level = max(level, l+1)
		}
	}
	if x.postLevel == nil {
		x.postLevel = map[string]int{}
	}
	for len(x.post) <= level {
		x.post = append(x.post, nil)
	}
	name := "p" + strconv.Itoa(x.npost)
	x.npost++
	x.post[level] = append(x.post[level], expr+" AS "+name)
	x.postLevel[name] = level
	return name
}

// model adds a model's trees, sums and links, reading its features from the columns
// feat, and returns one column per prediction component; components not in need are "".
func (x *sqlExport) model(m *Model, feat []string, need []bool) ([]string, error) {
	W := m.Width()
	out := make([]string, W)
	x.cur = m
	switch {
	case m.Blend != nil:
		return x.blend(m, feat, need)
	case m.Linear != nil:
		raw := x.addSlot(x.linearTerms(m, feat))
		if m.Task == Classification {
			out[0], out[1] = x.twoClass(raw, need)
			return out, nil
		}
		out[0] = raw
		return out, nil
	case m.Boost != nil && len(m.Boost.InitScore) > 1:
		K := len(m.Boost.InitScore)
		terms := make([][]sqlTerm, K)
		for k := range K {
			terms[k] = []sqlTerm{{-1, x.lit(m.Boost.InitScore[k])}}
		}
		for ti, t := range m.Trees {
			col := x.addTree(x.treeExpr(t, feat, x.valueLeaf(t, 0)))
			terms[ti%K] = append(terms[ti%K], sqlTerm{len(x.trees) - 1, col})
		}
		raw := make([]string, K)
		for k := range K {
			raw[k] = x.addSlot(terms[k])
		}
		top := x.addPost(x.greatest(raw), raw...)
		ex := make([]string, K)
		for k := range K {
			ex[k] = x.addPost(x.expGuard(raw[k]+" - "+top), raw[k], top)
		}
		sum := x.addPost(strings.Join(ex, " + "), ex...)
		for k := range K {
			if need[k] {
				out[k] = x.addPost(ex[k]+" / "+sum, ex[k], sum)
			}
		}
		return out, nil
	case m.Boost != nil:
		terms := []sqlTerm{{-1, x.lit(m.Boost.InitScore[0])}}
		for _, t := range m.Trees {
			col := x.addTree(x.treeExpr(t, feat, x.valueLeaf(t, 0)))
			terms = append(terms, sqlTerm{len(x.trees) - 1, col})
		}
		raw := x.addSlot(terms)
		switch m.Boost.Loss {
		case LossLogistic:
			out[0], out[1] = x.twoClass(raw, need)
		case LossPoisson:
			out[0] = x.addPost(x.expGuard(raw), raw)
		default:
			out[0] = raw
		}
		return out, nil
	case m.AdaBoost != nil:
		// Each tree votes α for its leaf's class: the tree column holds the class.
		terms := make([][]sqlTerm, W)
		sum := 0.0
		for ti, t := range m.Trees {
			col := x.addTree(x.treeExpr(t, feat, func(leaf int) string {
				return strconv.Itoa(Class(t.NodeValue(leaf)))
			}))
			a := m.AdaBoost.Alpha[ti]
			sum += a
			for k := range W {
				if need[k] {
					terms[k] = append(terms[k], sqlTerm{len(x.trees) - 1,
						"CASE WHEN " + col + " = " + strconv.Itoa(k) + " THEN " + x.lit(a) + " ELSE " + x.lit(0) + " END"})
				}
			}
		}
		for k := range W {
			if need[k] {
				s := x.addSlot(terms[k])
				out[k] = x.addPost(s+" / "+x.lit(sum), s)
			}
		}
		return out, nil
	}
	// An average of trees: class shares or values, summed in tree order, then scaled.
	inv := x.lit(1 / float64(len(m.Trees)))
	wanted := 0
	last := 0
	for k, n := range need {
		if n {
			wanted++
			last = k
		}
	}
	terms := make([][]sqlTerm, W)
	for _, t := range m.Trees {
		if wanted == 1 {
			col := x.addTree(x.treeExpr(t, feat, x.valueLeaf(t, last)))
			terms[last] = append(terms[last], sqlTerm{len(x.trees) - 1, col})
			continue
		}
		// Several components: the tree column holds the leaf, looked up per component.
		col := x.addTree(x.treeExpr(t, feat, strconv.Itoa))
		for k := range W {
			if !need[k] {
				continue
			}
			var b strings.Builder
			b.WriteString("CASE " + col)
			for i := range t.Nodes {
				if t.Nodes[i].IsLeaf() {
					b.WriteString(" WHEN " + strconv.Itoa(i) + " THEN " + x.num(t.Value[i*t.Width+k]))
				}
			}
			b.WriteString(" END")
			terms[k] = append(terms[k], sqlTerm{len(x.trees) - 1, x.double(b.String())})
		}
	}
	for k := range W {
		if need[k] {
			s := x.addSlot(terms[k])
			out[k] = x.addPost(s+" * "+inv, s)
		}
	}
	return out, nil
}

// blend adds a blend: each member on its own features (by name), then the rule.
func (x *sqlExport) blend(m *Model, feat []string, need []bool) ([]string, error) {
	b := m.Blend
	at := make(map[string]string, len(m.Features))
	for i, f := range m.Features {
		at[f.Name] = feat[i]
	}
	W := m.Width()
	mine := make([][]string, len(b.Members))
	for j, mem := range b.Members {
		mf := make([]string, len(mem.Features))
		for i, f := range mem.Features {
			mf[i] = at[f.Name]
		}
		mneed := need
		if b.Rule == BlendVote {
			mneed = make([]bool, W) // the vote needs every class to find the winner
			for k := range mneed {
				mneed[k] = true
			}
		}
		cols, err := x.model(mem, mf, mneed)
		if err != nil {
			return nil, fmt.Errorf("blend member %q: %w", b.Names[j], err)
		}
		mine[j] = cols
	}
	out := make([]string, W)
	if b.Rule == BlendVote {
		winner := make([]string, len(b.Members))
		for j, cols := range mine {
			winner[j] = x.addPost(x.argmax(cols), cols...)
		}
		for k := range W {
			if !need[k] {
				continue
			}
			parts := make([]string, len(winner))
			for j, c := range winner {
				parts[j] = "CASE WHEN " + c + " = " + strconv.Itoa(k) + " THEN " + x.lit(b.Weights[j]) + " ELSE " + x.lit(0) + " END"
			}
			out[k] = x.addPost(strings.Join(parts, " + "), winner...)
		}
		return out, nil
	}
	for k := range W {
		if !need[k] {
			continue
		}
		parts := make([]string, len(mine))
		uses := make([]string, len(mine))
		for j, cols := range mine {
			parts[j] = x.lit(b.Weights[j]) + " * " + cols[k]
			uses[j] = cols[k]
		}
		out[k] = x.addPost(strings.Join(parts, " + "), uses...)
	}
	return out, nil
}

// linearTerms writes a linear model's terms, in term order.
func (x *sqlExport) linearTerms(m *Model, feat []string) []sqlTerm {
	terms := make([]sqlTerm, len(m.Linear.Terms))
	for j, t := range m.Linear.Terms {
		est := x.lit(t.Estimate)
		var e string
		switch t.Kind {
		case TermIntercept:
			e = est
		case TermValue:
			e = est + " * COALESCE(" + feat[t.Feature] + ", " + x.lit(t.Fill) + ")"
		case TermMissing:
			e = "CASE WHEN " + feat[t.Feature] + " IS NULL THEN " + est + " ELSE " + x.lit(0) + " END"
		case TermLevel:
			e = "CASE WHEN " + feat[t.Feature] + " = " + quoteSQLString(m.Features[t.Feature].Levels[t.Level]) +
				" THEN " + est + " ELSE " + x.lit(0) + " END"
		case TermNoLevel:
			// Scoring reads NULL and levels unseen in training alike as missing.
			e = "CASE WHEN " + feat[t.Feature] + " IN (" + sqlStrings(m.Features[t.Feature].Levels) + ") THEN " +
				x.lit(0) + " ELSE " + est + " END"
		}
		terms[j] = sqlTerm{-1, e}
	}
	return terms
}

// valueLeaf writes component k of a leaf's value.
func (x *sqlExport) valueLeaf(t *Tree, k int) func(int) string {
	return func(leaf int) string { return x.num(t.Value[leaf*t.Width+k]) }
}

// treeExpr writes a tree as nested CASEs, leaves written by leaf, cast to DOUBLE
// PRECISION where the dialect needs it.
func (x *sqlExport) treeExpr(t *Tree, feat []string, leaf func(int) string) string {
	var b strings.Builder
	x.node(&b, t, 0, feat, leaf)
	return x.double(b.String())
}

// double casts a CASE of literals to DOUBLE PRECISION in PostgreSQL, which types
// E-notation literals NUMERIC; elsewhere they are doubles already. Integer leaves
// (leaf numbers, classes) are cast alike, harmlessly.
func (x *sqlExport) double(e string) string {
	if x.d == DialectPostgres {
		return "CAST(" + e + " AS DOUBLE PRECISION)"
	}
	return e
}

// node writes node i: a leaf, or CASE WHEN <goes left> THEN left ELSE right END.
//
// Numeric: x ≤ threshold goes left; NULL goes left only when the default is left (an
// infinite threshold, which splits missing from present values, is written without one).
// Categorical: with default left, a row goes right exactly when its level is one of the
// known levels sent right (NULL and unseen levels fail IN and go left); with default
// right, it goes left exactly when its level is one sent left. An empty list means every
// row takes one side, so only that child is written.
func (x *sqlExport) node(b *strings.Builder, t *Tree, i int, feat []string, leaf func(int) string) {
	n := &t.Nodes[i]
	if n.IsLeaf() {
		b.WriteString(leaf(i))
		return
	}
	l, r := int(n.Left), int(n.Left)+1
	col := feat[n.Feature]
	if n.LevelSet < 0 {
		// SQL has no literal for infinities: x ≤ +∞ holds for every value, x ≤ −∞ only
		// for −∞, which alone is below −MaxFloat64.
		var cond string
		switch {
		case math.IsInf(n.Threshold, 1) && n.DefaultLeft:
			x.node(b, t, l, feat, leaf)
			return
		case math.IsInf(n.Threshold, 1):
			cond = col + " IS NOT NULL"
		case math.IsInf(n.Threshold, -1):
			cond = col + " < " + x.num(-math.MaxFloat64)
		default:
			cond = col + " <= " + x.num(n.Threshold)
		}
		b.WriteString("CASE WHEN ")
		if n.DefaultLeft {
			b.WriteString(col + " IS NULL OR ")
		}
		b.WriteString(cond + " THEN ")
		x.node(b, t, l, feat, leaf)
		b.WriteString(" ELSE ")
		x.node(b, t, r, feat, leaf)
		b.WriteString(" END")
		return
	}
	levels := x.cur.Features[n.Feature].Levels
	var left, right []string
	for c, name := range levels {
		if t.levelGoesLeft(n, float64(c)) {
			left = append(left, name)
		} else {
			right = append(right, name)
		}
	}
	list, first, second := left, l, r
	if n.DefaultLeft {
		list, first, second = right, r, l
	}
	if len(list) == 0 {
		x.node(b, t, second, feat, leaf)
		return
	}
	b.WriteString("CASE WHEN " + col + " IN (" + sqlStrings(list) + ") THEN ")
	x.node(b, t, first, feat, leaf)
	b.WriteString(" ELSE ")
	x.node(b, t, second, feat, leaf)
	b.WriteString(" END")
}

// twoClass writes the class probabilities [1−p, p] of a raw score through the
// logistic link; 1−p only when it is needed.
func (x *sqlExport) twoClass(raw string, need []bool) (string, string) {
	p := x.addPost(x.logistic(raw), raw)
	if !need[0] {
		return "", p
	}
	return x.addPost(x.lit(1)+" - "+p, p), p
}

// logistic writes 1/(1+e^−s), guarded as exportExpLimit says.
func (x *sqlExport) logistic(s string) string {
	return "CASE WHEN " + s + " < " + x.lit(-exportExpLimit) + " THEN " + x.lit(0) +
		" WHEN " + s + " > " + x.lit(exportExpLimit) + " THEN " + x.lit(1) +
		" ELSE " + x.lit(1) + " / (" + x.lit(1) + " + EXP(-" + s + ")) END"
}

// expGuard writes e^s, 0 below −exportExpLimit.
func (x *sqlExport) expGuard(s string) string {
	return "CASE WHEN " + s + " < " + x.lit(-exportExpLimit) + " THEN " + x.lit(0) + " ELSE EXP(" + s + ") END"
}

// greatest writes the largest of the columns: GREATEST where the dialect has it (not
// ANSI), else a CASE chain.
func (x *sqlExport) greatest(cols []string) string {
	if x.d != DialectStandard {
		return "GREATEST(" + strings.Join(cols, ", ") + ")"
	}
	e := cols[0]
	for _, c := range cols[1:] {
		e = "CASE WHEN " + c + " > " + e + " THEN " + c + " ELSE " + e + " END"
	}
	return e
}

// argmax writes the index of the first largest column, as Class picks it: the first k
// whose value is at least every later one.
func (x *sqlExport) argmax(cols []string) string {
	var b strings.Builder
	b.WriteString("CASE")
	for k := 0; k < len(cols)-1; k++ {
		b.WriteString(" WHEN ")
		for i := k + 1; i < len(cols); i++ {
			if i > k+1 {
				b.WriteString(" AND ")
			}
			b.WriteString(cols[k] + " >= " + cols[i])
		}
		b.WriteString(" THEN " + strconv.Itoa(k))
	}
	b.WriteString(" ELSE " + strconv.Itoa(len(cols)-1) + " END")
	return b.String()
}

// text lays out the stages.
func (x *sqlExport) text(m *Model, opt SQLOptions, rel string, final []string) string {
	var b strings.Builder
	b.WriteString("-- copse model export")
	if opt.Title != "" {
		b.WriteString(": " + strings.Join(strings.Fields(opt.Title), " "))
	}
	fmt.Fprintf(&b, "\n-- method %s, task %s, %d trees; dialect %s; input relation %s\n", m.Method, m.Task, len(x.trees), x.d, rel)
	b.WriteString("-- Missing values (NULL, and levels not seen in training) follow each split's default direction.\n")
	b.WriteString("WITH copse_stage_0 AS (\n  SELECT " + strings.Join(x.in, ",\n    ") + "\n  FROM " + rel + "\n)")
	stage := 0
	pos := make([]int, len(x.slots))
	started := make([]bool, len(x.slots))
	for lo := 0; ; lo += exportTreesPerStage {
		hi := min(len(x.trees), lo+exportTreesPerStage)
		cols := append([]string{}, x.carry...)
		done := true
		for si := range x.slots {
			s := &x.slots[si]
			name := "s" + strconv.Itoa(si)
			var add []string
			budget := exportTreesPerStage // for terms without a tree
			for pos[si] < len(s.terms) {
				// Terms of the previous stage's trees must be taken now: their
				// columns are not passed on.
				t := s.terms[pos[si]]
				if t.tree >= lo || t.tree < 0 && budget == 0 {
					break
				}
				add = append(add, t.expr)
				pos[si]++
				if t.tree < 0 {
					budget--
				}
			}
			switch {
			case len(add) == 0 && started[si]:
				cols = append(cols, name)
			case len(add) > 0 && started[si]:
				cols = append(cols, name+" + "+strings.Join(add, " + ")+" AS "+name)
			case len(add) > 0:
				cols = append(cols, strings.Join(add, " + ")+" AS "+name)
				started[si] = true
			}
			if pos[si] < len(s.terms) {
				done = false
			}
		}
		for ti := lo; ti < hi; ti++ {
			cols = append(cols, x.trees[ti]+" AS t"+strconv.Itoa(ti))
		}
		stage++
		fmt.Fprintf(&b, ",\ncopse_stage_%d AS (\n  SELECT %s\n  FROM copse_stage_%d\n)", stage, strings.Join(cols, ",\n    "), stage-1)
		if done && hi >= len(x.trees) {
			break
		}
	}
	// After the sums only keys, the exposure, the sums and the post columns are needed.
	var keep []string
	keep = append(keep, x.carry[:x.keys]...)
	if m.Params.Exposure != "" {
		keep = append(keep, "e")
	}
	for si := range x.slots {
		keep = append(keep, "s"+strconv.Itoa(si))
	}
	for _, layer := range x.post {
		cols := append(append([]string{}, keep...), layer...)
		stage++
		fmt.Fprintf(&b, ",\ncopse_stage_%d AS (\n  SELECT %s\n  FROM copse_stage_%d\n)", stage, strings.Join(cols, ",\n    "), stage-1)
		for _, c := range layer {
			keep = append(keep, c[strings.LastIndex(c, " AS ")+4:])
		}
	}
	fmt.Fprintf(&b, "\nSELECT %s\nFROM copse_stage_%d\n", strings.Join(final, ",\n  "), stage)
	return b.String()
}

// sqlRelation quotes a relation name, part by part.
func sqlRelation(rel string) (string, error) {
	parts := strings.Split(rel, ".")
	for i, p := range parts {
		if p == "" || strings.ContainsRune(p, 0) {
			return "", errors.New("want a name or schema.name without empty parts or NUL")
		}
		if strings.HasPrefix(strings.ToLower(p), "copse_stage_") {
			return "", errors.New("names starting copse_stage_ are the export's own")
		}
		parts[i] = quoteSQLIdent(p)
	}
	return strings.Join(parts, "."), nil
}

// quoteSQLIdent quotes an identifier, doubling its quotes (ANSI).
func quoteSQLIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// quoteSQLString writes a string literal, doubling its quotes (ANSI).
func quoteSQLString(s string) string { return "'" + strings.ReplaceAll(s, "'", "''") + "'" }

// sqlStrings writes a list of string literals for IN.
func sqlStrings(ss []string) string {
	q := make([]string, len(ss))
	for i, s := range ss {
		q[i] = quoteSQLString(s)
	}
	return strings.Join(q, ", ")
}
