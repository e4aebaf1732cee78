package udf

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
	"unicode"

	"github.com/duckdb/duckdb-go/v2/mapping"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/internal/sqlsplit"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// sourceQuery turns copse_train's source argument into the SELECT that reads it:
//
//	table, schema.table, "Odd Name"   → SELECT * FROM "table" (every part quoted)
//	read_parquet('x/*.parquet')        → SELECT * FROM read_parquet('x/*.parquet')
//	SELECT …, WITH …, FROM …, VALUES …, ( … )  → SELECT * FROM ( … ) AS copse_source
//
// The text is the user's own SQL, run with their rights; what matters is that a name
// cannot turn into SQL and that a query stays one statement (DuckDB refuses to prepare
// two). The query goes inside the parentheses on lines of its own, so a trailing "--"
// comment cannot swallow the closing parenthesis.
func sourceQuery(src string) (string, error) {
	q, err := sourceQueryText(src)
	if err != nil {
		return "", err
	}
	// The driver runs every statement of a text it is given, the earlier ones for their
	// effects, and describe runs at bind: a source such as "t(1); DROP TABLE x; SELECT
	// (1)" must not turn an EXPLAIN, or a training that then fails, into a DROP.
	if n := len(sqlsplit.Split(q)); n != 1 {
		return "", fmt.Errorf("source %q: holds more than one statement; give one table, table function call or query", src)
	}
	return q, nil
}

func sourceQueryText(src string) (string, error) {
	s := strings.TrimSpace(src)
	if s == "" {
		return "", errors.New("the source is empty: give a table or view name, a table function call or a query")
	}
	if isSourceQuery(s) {
		s = strings.TrimRight(s, "; \t\r\n")
		return "SELECT * FROM (\n" + s + "\n) AS copse_source", nil
	}
	if parts, rest, ok := parseQualifiedName(s); ok {
		if rest == "" {
			quoted := make([]string, len(parts))
			for i, p := range parts {
				quoted[i] = quoteIdent(p)
			}
			return "SELECT * FROM " + strings.Join(quoted, "."), nil
		}
		if strings.HasPrefix(strings.TrimLeftFunc(rest, unicode.IsSpace), "(") && strings.HasSuffix(s, ")") {
			return "SELECT * FROM " + s + "\n", nil
		}
	}
	return "", fmt.Errorf("source %q: want a table or view name, a table function call such as read_parquet('f.parquet'), or a query starting with SELECT, WITH, FROM, VALUES or '('", src)
}

// isSourceQuery reports whether s (leading comments aside) starts a query.
func isSourceQuery(s string) bool {
	s = skipComments(s)
	if strings.HasPrefix(s, "(") {
		return true
	}
	end := strings.IndexFunc(s, func(r rune) bool { return !unicode.IsLetter(r) })
	if end < 0 {
		end = len(s)
	}
	switch strings.ToUpper(s[:end]) {
	case "SELECT", "WITH", "FROM", "VALUES":
		return true
	}
	return false
}

// skipComments drops leading white space and SQL comments.
func skipComments(s string) string {
	for {
		s = strings.TrimLeftFunc(s, unicode.IsSpace)
		switch {
		case strings.HasPrefix(s, "--"):
			i := strings.IndexByte(s, '\n')
			if i < 0 {
				return ""
			}
			s = s[i+1:]
		case strings.HasPrefix(s, "/*"):
			i := strings.Index(s, "*/")
			if i < 0 {
				return ""
			}
			s = s[i+2:]
		default:
			return s
		}
	}
}

// parseQualifiedName reads name(.name)* from the start of s, each name bare (letters,
// digits, '_' and '$', not starting with a digit) or double-quoted with "" for a quote,
// and returns the unquoted parts and what follows.
func parseQualifiedName(s string) (parts []string, rest string, ok bool) {
	for {
		var part string
		if strings.HasPrefix(s, `"`) {
			var b strings.Builder
			i := 1
			for {
				j := strings.IndexByte(s[i:], '"')
				if j < 0 {
					return nil, "", false
				}
				b.WriteString(s[i : i+j])
				i += j + 1
				if !strings.HasPrefix(s[i:], `"`) {
					break
				}
				b.WriteByte('"')
				i++
			}
			part, s = b.String(), s[i:]
			if part == "" {
				return nil, "", false
			}
		} else {
			end := strings.IndexFunc(s, func(r rune) bool {
				return !(unicode.IsLetter(r) || unicode.IsDigit(r) || r == '_' || r == '$')
			})
			if end < 0 {
				end = len(s)
			}
			part, s = s[:end], s[end:]
			if part == "" || unicode.IsDigit([]rune(part)[0]) {
				return nil, "", false
			}
		}
		parts = append(parts, part)
		if !strings.HasPrefix(s, ".") {
			return parts, s, true
		}
		s = s[1:]
	}
}

// quoteIdent quotes a name for SQL (DuckDB matches quoted names case-insensitively too).
func quoteIdent(s string) string { return `"` + strings.ReplaceAll(s, `"`, `""`) + `"` }

// colKind is how copse can use a source column.
type colKind uint8

const (
	kindUnknown     colKind = iota // bind: a type name not known here; the read decides
	kindNumeric                    // numbers, DATE, TIMESTAMP, DECIMAL
	kindBoolean                    // numeric 0/1; classes false/true as a target
	kindCategorical                // VARCHAR, ENUM
	kindUnsupported                // LIST, STRUCT, BLOB, …
)

// srcColumn is a source column as DESCRIBE or the read reports it.
type srcColumn struct {
	name, typ string
	kind      colKind
	enum      bool // categorical with the enum's own level order
}

var numericTypeNames = map[string]bool{
	"TINYINT": true, "SMALLINT": true, "INTEGER": true, "BIGINT": true, "HUGEINT": true,
	"UTINYINT": true, "USMALLINT": true, "UINTEGER": true, "UBIGINT": true,
	"FLOAT": true, "DOUBLE": true, "DATE": true, "TIMESTAMP": true, "TIMESTAMP_S": true,
	"TIMESTAMP_MS": true, "TIMESTAMP_NS": true, "TIMESTAMP WITH TIME ZONE": true,
}

var unsupportedTypeNames = map[string]bool{
	"BLOB": true, "UUID": true, "INTERVAL": true, "TIME": true, "TIME WITH TIME ZONE": true,
	"BIT": true, "UHUGEINT": true, "BIGNUM": true, "VARINT": true, "NULL": true,
}

// kindOfTypeName classifies a type as DESCRIBE spells it. Names it does not know
// (user type aliases, extension types) are left to the read, which sees DuckDB's type
// ids, so bind never refuses what the read would accept.
func kindOfTypeName(t string) srcColumn {
	c := srcColumn{typ: t}
	u := strings.ToUpper(t)
	switch {
	case u == "BOOLEAN":
		c.kind = kindBoolean
	case numericTypeNames[u] || strings.HasPrefix(u, "DECIMAL("):
		c.kind = kindNumeric
	case u == "VARCHAR" || strings.HasPrefix(u, "VARCHAR "):
		c.kind = kindCategorical
	case strings.HasPrefix(u, "ENUM("):
		c.kind, c.enum = kindCategorical, true
	case unsupportedTypeNames[u] || strings.HasSuffix(u, "]") || strings.HasPrefix(u, "STRUCT(") ||
		strings.HasPrefix(u, "MAP(") || strings.HasPrefix(u, "UNION("):
		c.kind = kindUnsupported
	}
	return c
}

// columnOfResult describes a column the read returned.
func columnOfResult(r *duck.ResultColumn) srcColumn {
	c := srcColumn{name: r.Name, typ: r.Type.String(), kind: kindNumeric}
	switch {
	case r.Codes != nil:
		c.kind, c.enum = kindCategorical, r.Type.ID == mapping.TypeEnum
	case r.Type.ID == mapping.TypeBoolean:
		c.kind = kindBoolean
	}
	return c
}

// hintCommitted explains the usual cause of a missing table: the source is read on
// another connection.
const hintCommitted = "copse_train reads the source on a connection of its own, which sees committed data only " +
	"and resolves names in the default schema: TEMP tables and rows not yet committed are invisible to it; " +
	"train from a table or view, qualified as schema.table if it is not in the default schema"

// describe returns the source's columns without running it (DuckDB's DESCRIBE binds
// the query only).
func (h *Host) describe(ctx context.Context, c *trainCall) ([]srcColumn, error) {
	rows, err := h.db.QueryContext(ctx, "DESCRIBE "+c.query)
	if err != nil {
		return nil, c.sourceErr(err.Error())
	}
	defer rows.Close()
	names, err := rows.Columns()
	if err != nil {
		return nil, c.sourceErr(err.Error())
	}
	if len(names) < 2 {
		return nil, fmt.Errorf("copse_train %q: source %q: DESCRIBE returned %d columns, not a column list", c.name, c.source, len(names))
	}
	var cols []srcColumn
	vals := make([]any, len(names))
	ptrs := make([]any, len(names))
	for i := range vals {
		ptrs[i] = &vals[i]
	}
	for rows.Next() {
		if err := rows.Scan(ptrs...); err != nil {
			return nil, c.sourceErr(err.Error())
		}
		name, _ := vals[0].(string)
		typ, _ := vals[1].(string)
		col := kindOfTypeName(typ)
		col.name = name
		cols = append(cols, col)
	}
	if err := rows.Err(); err != nil {
		return nil, c.sourceErr(err.Error())
	}
	return cols, nil
}

// sourceErr reports a failure of the source query in DuckDB's words.
func (c *trainCall) sourceErr(msg string) error {
	msg = strings.TrimPrefix(msg, "duck: read: ")
	// DuckDB's caret points into the query copse built around the source, not into
	// anything the user wrote: leave it out.
	if i := strings.Index(msg, "\n\nLINE "); i >= 0 {
		msg = msg[:i]
	}
	msg = strings.TrimSpace(msg)
	if strings.Contains(msg, "Catalog Error") {
		msg += "\n(" + hintCommitted + ")"
	}
	return fmt.Errorf("copse_train %q: source %q: %s", c.name, c.source, msg)
}

// holdoutColumn marks, in the union of a source and its holdout, the holdout's rows.
const holdoutColumn = "copse_holdout_row"

// withHoldout returns a copy of c whose query reads the source's rows and then the
// holdout's (its columns taken by the source's names, so a holdout with more columns
// is fine and one without a source column is refused by name), with holdoutColumn
// marking the latter. One read then codes both alike.
func (h *Host) withHoldout(ctx context.Context, c *trainCall) (*trainCall, error) {
	cols, err := h.describe(ctx, c)
	if err != nil {
		return nil, err
	}
	hc := *c
	hc.query, hc.source = c.holdoutQuery, c.holdout
	hcols, err := h.describe(ctx, &hc)
	if err != nil {
		return nil, fmt.Errorf("%w (the holdout)", err)
	}
	list := make([]string, len(cols))
	for i, col := range cols {
		if strings.EqualFold(col.name, holdoutColumn) {
			return nil, fmt.Errorf("copse_train %q: source %q has a column %q, which copse uses to mark the holdout's rows; rename it", c.name, c.source, col.name)
		}
		found := false
		for _, hcol := range hcols {
			found = found || strings.EqualFold(hcol.name, col.name)
		}
		if !found {
			return nil, fmt.Errorf("copse_train %q: holdout %q has no column %q, which the source has (its columns: %s)", c.name, c.holdout, col.name, columnList(hcols))
		}
		list[i] = quoteIdent(col.name)
	}
	sel := strings.Join(list, ", ")
	out := *c
	out.query = "SELECT " + sel + ", FALSE AS " + holdoutColumn + " FROM (\n" + c.query + "\n) AS copse_source\n" +
		"UNION ALL\nSELECT " + sel + ", TRUE FROM (\n" + c.holdoutQuery + "\n) AS copse_holdout"
	return &out, nil
}

// columnIndex finds name among cols as SQL identifiers match: the column of exactly that
// name, or else the one column equal to it ignoring case (-1: none). twice reports two
// columns of exactly that name; cases reports several of it in different cases and
// none exact.
func columnIndex(cols []srcColumn, name string) (i int, twice, cases bool) {
	exact, folded, nf := -1, -1, 0
	for j, c := range cols {
		if c.name == name {
			if exact >= 0 {
				return -1, true, false
			}
			exact = j
		}
		if strings.EqualFold(c.name, name) {
			folded, nf = j, nf+1
		}
	}
	switch {
	case exact >= 0:
		return exact, false, false
	case nf == 1:
		return folded, false, false
	case nf > 1:
		return -1, false, true
	}
	return -1, false, false
}

// layout is the role of each source column in a training.
type layout struct {
	cols     []srcColumn
	target   int
	weight   int // -1: none
	exposure int // -1: none
	key      int // -1: none
	holdout  int // -1: none; holdoutColumn when the call has a holdout
	features []int
	skip     map[string]bool // excluded columns, not read at all
	classify int             // 1 classes, 0 numbers, -1 not known until the read
}

// resolve matches the call's column names to the source's columns and checks every
// role. Names match exactly or, failing that, case-insensitively as SQL identifiers do.
func (c *trainCall) resolve(cols []srcColumn) (*layout, error) {
	fail := func(format string, a ...any) error {
		return fmt.Errorf("copse_train %q: "+format, append([]any{c.name}, a...)...)
	}
	find := func(opt, name string) (int, error) {
		i, twice, cases := columnIndex(cols, name)
		switch {
		case twice:
			return -1, fail("%s %q: the source has two columns of that name", opt, name)
		case cases:
			return -1, fail("%s %q: the source has several columns of that name in different cases", opt, name)
		case i < 0:
			return -1, fail("%s %q: no such column in the source (its columns: %s)", opt, name, columnList(cols))
		}
		return i, nil
	}
	l := &layout{cols: cols, weight: -1, exposure: -1, key: -1, holdout: -1, skip: map[string]bool{}}
	var err error
	if l.target, err = find("target", c.target); err != nil {
		return nil, err
	}
	if c.weight != "" {
		if l.weight, err = find("weight", c.weight); err != nil {
			return nil, err
		}
	}
	if c.key != "" {
		if l.key, err = find("key", c.key); err != nil {
			return nil, err
		}
	}
	if c.exposure != "" {
		if l.exposure, err = find("exposure", c.exposure); err != nil {
			return nil, err
		}
	}
	if c.holdoutQuery != "" {
		for i, col := range cols {
			if col.name == holdoutColumn {
				l.holdout = i
			}
		}
	}
	if l.weight >= 0 && l.weight == l.key {
		return nil, fail("weight and key name the same column %q", cols[l.key].name)
	}
	if i := l.exposure; i >= 0 && (i == l.target || i == l.weight || i == l.key) {
		return nil, fail("exposure %q is also the target, weight or key", cols[i].name)
	}
	role := func(i int) bool {
		return i == l.target || i == l.weight || i == l.key || i == l.exposure || i == l.holdout
	}
	excluded := map[int]bool{}
	for _, e := range c.exclude {
		i, err := find("exclude", e)
		if err != nil {
			return nil, err
		}
		if i == l.target {
			return nil, fail("exclude names the target %q", cols[i].name)
		}
		excluded[i] = true
		if !role(i) {
			l.skip[cols[i].name] = true
		}
	}

	t := cols[l.target]
	switch {
	case t.kind == kindUnsupported:
		return nil, fail("target %q has type %s; want a numeric, BOOLEAN, VARCHAR or ENUM column", t.name, t.typ)
	case t.kind == kindCategorical && c.task == taskRegression:
		return nil, fail("target %q has type %s: regression needs a numeric target (task := 'classification' or 'auto' treats it as classes)", t.name, t.typ)
	case t.kind == kindCategorical || t.kind == kindBoolean && c.task != taskRegression:
		l.classify = 1
	case t.kind == kindUnknown:
		l.classify = -1
	case c.task == taskClassification:
		l.classify = 1
	}
	if l.classify == 0 {
		if c.hasPos {
			return nil, fail("positive applies to classification, and target %q (%s) is trained as regression; task := 'classification' treats its values as classes", t.name, t.typ)
		}
		if c.impurity {
			return nil, fail("impurity applies to classification, and target %q (%s) is trained as regression", t.name, t.typ)
		}
	}
	if l.weight >= 0 {
		if w := cols[l.weight]; w.kind == kindCategorical || w.kind == kindUnsupported {
			return nil, fail("weight %q has type %s; want a numeric column", w.name, w.typ)
		}
	}
	if l.exposure >= 0 {
		if e := cols[l.exposure]; e.kind == kindCategorical || e.kind == kindUnsupported || e.kind == kindBoolean {
			return nil, fail("exposure %q has type %s; want a numeric column", e.name, e.typ)
		}
	}
	for i, col := range cols {
		if role(i) || excluded[i] {
			continue
		}
		if col.kind == kindUnsupported {
			return nil, fail("column %q has type %s, which copse cannot train on; leave it out with exclude := [%s]",
				col.name, col.typ, "'"+strings.ReplaceAll(col.name, "'", "''")+"'")
		}
		l.features = append(l.features, i)
	}
	if len(l.features) == 0 {
		return nil, fail("no feature columns are left (source columns: %s)", columnList(cols))
	}
	if f := c.params.FeaturesPerSplit; f > float64(len(l.features)) {
		return nil, fail("features_per_split %g: the source has %d feature columns", f, len(l.features))
	}
	return l, nil
}

// columnList names up to a dozen columns for an error message.
func columnList(cols []srcColumn) string {
	const most = 12
	names := make([]string, 0, min(len(cols), most))
	for _, c := range cols[:min(len(cols), most)] {
		names = append(names, strconv.Quote(c.name))
	}
	s := strings.Join(names, ", ")
	if len(cols) > most {
		s += fmt.Sprintf(", … (%d in all)", len(cols))
	}
	if s == "" {
		s = "none"
	}
	return s
}

// readQuery is the query the training reads: the source, with the key column cast to
// text so any key type (integers, dates, UUIDs) is kept exactly as DuckDB prints it.
func (l *layout) readQuery(base string) string {
	if l.key < 0 {
		return base
	}
	k := quoteIdent(l.cols[l.key].name)
	return "SELECT * REPLACE (CAST(" + k + " AS VARCHAR) AS " + k + ") FROM (\n" + base + "\n) AS copse_keyed"
}

// trainingData is a source read into the engine's form.
type trainingData struct {
	set     *forest.Dataset
	keys    []string // nil without a key column
	keyNull []bool   // which keys are NULL; nil when none is
	actuals []string // the target of each row trained on, as text, for copse_oob
	skipped int      // rows left out for a NULL target
	// featureTypes is each feature's source kind, by feature name.
	featureTypes map[string]string
}

// featureKind is the kind the catalog records for a feature read from r.
func featureKind(r *duck.ResultColumn, info srcColumn) string {
	switch {
	case r.Codes != nil && info.enum:
		return featEnum
	case r.Codes != nil:
		return featText
	}
	switch r.Type.ID {
	case mapping.TypeBoolean:
		return featBoolean
	case mapping.TypeDate:
		return featDate
	case mapping.TypeTimestamp, mapping.TypeTimestampS, mapping.TypeTimestampMS, mapping.TypeTimestampNS, mapping.TypeTimestampTZ:
		return featTimestamp
	}
	return featNumber
}

// readTraining reads the source on a pooled connection and builds the engine's data set.
//
// Level order, which the model keeps: a VARCHAR column's levels are its distinct values
// in the training rows, sorted bytewise; an ENUM column keeps its type's own levels in
// declaration order. Classes follow the same rules (an ENUM target keeps only the values
// that occur); a numeric target under task := 'classification' has its distinct values
// in numeric order, written as text ("0", "1", "2.5"); a BOOLEAN target has "false",
// "true". With two classes, the second is the positive one unless positive := names the
// other.
func (h *Host) readTraining(ctx context.Context, c *trainCall) (*trainingData, error) {
	if c.holdoutQuery != "" {
		hc, err := h.withHoldout(ctx, c)
		if err != nil {
			return nil, err
		}
		c = hc
	}
	cols, err := h.describe(ctx, c)
	if err != nil {
		return nil, err
	}
	l, err := c.resolve(cols)
	if err != nil {
		return nil, err
	}
	res, err := duck.ReadColumns(ctx, h.db, l.readQuery(c.query), duck.ReadOptions{Skip: func(n string) bool { return l.skip[n] }})
	if err != nil {
		if errors.Is(err, duck.ErrColumnType) {
			return nil, fmt.Errorf("copse_train %q: %w (exclude := [...] leaves a column out)", c.name, err)
		}
		if ctx.Err() != nil {
			return nil, fmt.Errorf("copse_train %q: %w", c.name, err)
		}
		return nil, c.sourceErr(err.Error())
	}
	// The read returns the described columns minus the skipped ones, in order; check,
	// in case the source changed in between, and take the real types.
	byCol := make([]*duck.ResultColumn, len(cols))
	j := 0
	for i, col := range cols {
		if l.skip[col.name] {
			continue
		}
		if j >= len(res) || res[j].Name != col.name {
			return nil, fmt.Errorf("copse_train %q: source %q changed while it was read; run again", c.name, c.source)
		}
		byCol[i] = &res[j]
		j++
	}
	if j != len(res) {
		return nil, fmt.Errorf("copse_train %q: source %q changed while it was read; run again", c.name, c.source)
	}
	actual := make([]srcColumn, len(cols))
	for i, r := range byCol {
		if r == nil {
			actual[i] = cols[i] // skipped: never used
			continue
		}
		actual[i] = columnOfResult(r)
	}
	if l.key >= 0 {
		actual[l.key] = cols[l.key] // read as text on purpose
	}
	if l, err = c.resolve(actual); err != nil {
		return nil, err
	}
	return c.build(l, byCol)
}

// build turns the read columns into a data set.
func (c *trainCall) build(l *layout, byCol []*duck.ResultColumn) (*trainingData, error) {
	fail := func(format string, a ...any) error {
		return fmt.Errorf("copse_train %q: "+format, append([]any{c.name}, a...)...)
	}
	tcol, tinfo := byCol[l.target], l.cols[l.target]
	n := max(len(tcol.Values), len(tcol.Codes))
	if n == 0 {
		return nil, fail("the source %q returned no rows", c.source)
	}
	// keep lists the rows whose target is set; nil when that is every row.
	var keep []int32
	missing := func(i int) bool {
		if tcol.Codes != nil {
			return tcol.Codes[i] < 0
		}
		return math.IsNaN(tcol.Values[i])
	}
	skipped := 0
	for i := range n {
		if missing(i) {
			skipped++
		}
	}
	if skipped == n {
		return nil, fail("target %q is NULL in every one of the %d rows", tinfo.name, n)
	}
	if skipped > 0 {
		keep = make([]int32, 0, n-skipped)
		for i := range n {
			if !missing(i) {
				keep = append(keep, int32(i))
			}
		}
	}
	rows := n - skipped
	d := forest.NewDataset(rows)
	out := &trainingData{set: d, skipped: skipped}

	// Target.
	if l.classify == 1 {
		var codes []int32
		var classes []string
		var values []float64 // numeric classes' values, for matching positive
		if tcol.Codes != nil {
			codes, classes = levelOrder(compact(tcol.Codes, keep), tcol.Levels, !tinfo.enum)
		} else {
			var err error
			codes, classes, values, err = numericClasses(compact(tcol.Values, keep), tinfo.kind == kindBoolean)
			if err != nil {
				return nil, fail("target %q: %w", tinfo.name, err)
			}
		}
		if len(classes) < 2 {
			return nil, fail("target %q has a single class, %q, in its %d non-NULL rows; classification needs two or more", tinfo.name, classes[0], rows)
		}
		if c.hasPos {
			if len(classes) != 2 {
				return nil, fail("positive %q: target %q has %d classes; positive applies to two", c.positive, tinfo.name, len(classes))
			}
			k, err := matchClass(c.positive, classes, values, tinfo.kind == kindBoolean)
			if err != nil {
				return nil, fail("positive: %w (target %q)", err, tinfo.name)
			}
			if k == 0 {
				classes[0], classes[1] = classes[1], classes[0]
				for i := range codes {
					codes[i] = 1 - codes[i]
				}
			}
		}
		if err := d.SetClassTarget(tinfo.name, codes, classes); err != nil {
			return nil, fail("%w", err)
		}
		out.actuals = make([]string, rows)
		for i, c := range codes {
			out.actuals[i] = classes[c]
		}
	} else {
		y := compact(tcol.Values, keep)
		if err := d.SetRegressionTarget(tinfo.name, y); err != nil {
			return nil, fail("%w", err)
		}
		out.actuals = make([]string, rows)
		for i, v := range y {
			out.actuals[i] = strconv.FormatFloat(v, 'g', -1, 64)
		}
	}

	if l.weight >= 0 {
		w := compact(byCol[l.weight].Values, keep)
		for i, v := range w {
			if !(v >= 0) || math.IsInf(v, 0) {
				src := i
				if keep != nil {
					src = int(keep[i])
				}
				what := strconv.FormatFloat(v, 'g', -1, 64)
				if math.IsNaN(v) {
					what = "NULL"
				}
				return nil, fail("weight %q is %s in row %d; want a finite number ≥ 0", l.cols[l.weight].name, what, src+1)
			}
		}
		if err := d.SetWeights(w); err != nil {
			return nil, fail("weight %q: %w", l.cols[l.weight].name, err)
		}
	}
	if l.exposure >= 0 {
		e := compact(byCol[l.exposure].Values, keep)
		for i, v := range e {
			if !(v > 0) || math.IsInf(v, 0) {
				src := i
				if keep != nil {
					src = int(keep[i])
				}
				what := strconv.FormatFloat(v, 'g', -1, 64)
				if math.IsNaN(v) {
					what = "NULL"
				}
				return nil, fail("exposure %q is %s in row %d; want a finite number above 0", l.cols[l.exposure].name, what, src+1)
			}
		}
		if err := d.SetExposure(l.cols[l.exposure].name, e); err != nil {
			return nil, fail("exposure %q: %w", l.cols[l.exposure].name, err)
		}
	}
	if l.holdout >= 0 {
		v := compact(byCol[l.holdout].Values, keep)
		mask := make([]bool, len(v))
		held := 0
		for i, x := range v {
			mask[i] = x != 0
			if mask[i] {
				held++
			}
		}
		if held == 0 {
			return nil, fail("holdout %q returned no rows with a target", c.holdout)
		}
		if held == len(v) {
			return nil, fail("the source %q returned no rows with a target beside the holdout", c.source)
		}
		if err := d.SetHoldout(mask); err != nil {
			return nil, fail("holdout: %w", err)
		}
	}
	if l.key >= 0 {
		k := byCol[l.key]
		out.keys = make([]string, rows)
		for j := range rows {
			i := j
			if keep != nil {
				i = int(keep[j])
			}
			if code := k.Codes[i]; code >= 0 {
				out.keys[j] = k.Levels[code]
			} else {
				if out.keyNull == nil {
					out.keyNull = make([]bool, rows)
				}
				out.keyNull[j] = true
			}
		}
	}
	for _, f := range l.features {
		r, info := byCol[f], l.cols[f]
		var err error
		if r.Codes != nil {
			codes, levels := compact(r.Codes, keep), r.Levels
			if !info.enum {
				codes, levels = levelOrder(codes, levels, true)
			}
			err = d.AddCategorical(info.name, codes, levels)
		} else {
			err = d.AddNumeric(info.name, compact(r.Values, keep))
		}
		if err != nil {
			return nil, fail("%w", err)
		}
		if out.featureTypes == nil {
			out.featureTypes = map[string]string{}
		}
		out.featureTypes[info.name] = featureKind(r, info)
	}
	return out, nil
}

// compact keeps the listed rows of s (all of them when keep is nil), in place: keep is
// increasing, so no row is overwritten before it is read.
func compact[T any](s []T, keep []int32) []T {
	if keep == nil {
		return s
	}
	for j, i := range keep {
		s[j] = s[i]
	}
	return s[:len(keep)]
}

// levelOrder keeps the levels that occur in codes, sorted bytewise (sorted) or in their
// given order, and recodes codes in place to match; missing codes stay missing. Levels
// that do not occur can only come from rows left out for a NULL target.
func levelOrder(codes []int32, levels []string, sorted bool) ([]int32, []string) {
	used := make([]bool, len(levels))
	for _, k := range codes {
		if k >= 0 {
			used[k] = true
		}
	}
	order := make([]int32, 0, len(levels))
	for k := range levels {
		if used[k] {
			order = append(order, int32(k))
		}
	}
	if sorted {
		slices.SortFunc(order, func(a, b int32) int { return strings.Compare(levels[a], levels[b]) })
	}
	recode := make([]int32, len(levels))
	out := make([]string, len(order))
	for k, old := range order {
		recode[old] = int32(k)
		out[k] = levels[old]
	}
	for i, k := range codes {
		if k >= 0 {
			codes[i] = recode[k]
		}
	}
	return codes, out
}

// numericClasses turns a numeric target into classes: its distinct values in numeric
// order, named as text.
func numericClasses(v []float64, boolean bool) ([]int32, []string, []float64, error) {
	seen := map[float64]bool{}
	for _, x := range v {
		if !seen[x] {
			if len(seen) == math.MaxUint16 {
				return nil, nil, nil, fmt.Errorf("more than %d distinct values; too many classes (task := 'regression' predicts numbers)", math.MaxUint16)
			}
			seen[x] = true
		}
	}
	values := make([]float64, 0, len(seen))
	for x := range seen {
		values = append(values, x)
	}
	slices.SortFunc(values, cmp.Compare)
	index := make(map[float64]int32, len(values))
	names := make([]string, len(values))
	for k, x := range values {
		index[x] = int32(k)
		names[k] = numberLabel(x, boolean)
	}
	codes := make([]int32, len(v))
	for i, x := range v {
		codes[i] = index[x]
	}
	return codes, names, values, nil
}

// numberLabel names a numeric class: "false"/"true" for BOOLEAN, else the shortest
// decimal that reads back as the same number.
func numberLabel(x float64, boolean bool) string {
	if boolean {
		return strconv.FormatBool(x != 0)
	}
	if math.Abs(x) < 1e21 {
		return strconv.FormatFloat(x, 'f', -1, 64)
	}
	return strconv.FormatFloat(x, 'g', -1, 64)
}

// matchClass finds the class positive names: by value for numeric and BOOLEAN targets
// (so '1', '1.0' and 1 all name 1), by text otherwise.
func matchClass(positive string, classes []string, values []float64, boolean bool) (int, error) {
	if values != nil {
		var want float64
		var err error
		if boolean {
			var b bool
			b, err = strconv.ParseBool(strings.TrimSpace(positive))
			if b {
				want = 1
			}
		} else {
			want, err = strconv.ParseFloat(strings.TrimSpace(positive), 64)
		}
		if err == nil {
			if k := slices.Index(values, want); k >= 0 {
				return k, nil
			}
		}
	} else if k := slices.Index(classes, positive); k >= 0 {
		return k, nil
	}
	return 0, fmt.Errorf("%q is not one of the classes %s", positive, quotedList(classes))
}

// quotedList names up to a dozen labels for an error message.
func quotedList(s []string) string {
	const most = 12
	q := make([]string, 0, min(len(s), most))
	for _, x := range s[:min(len(s), most)] {
		q = append(q, strconv.Quote(x))
	}
	out := strings.Join(q, ", ")
	if len(s) > most {
		out += fmt.Sprintf(", … (%d in all)", len(s))
	}
	return out
}
