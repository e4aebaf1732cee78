package sqlrun

import (
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/duckdb/duckdb-go/v2"
	"github.com/mattn/go-runewidth"
)

// Format is an output format for result sets.
type Format string

// The output formats.
const (
	FormatTable    Format = "table"    // aligned columns for reading in a terminal
	FormatCSV      Format = "csv"      // RFC 4180, a header line, NULL as an empty field
	FormatJSON     Format = "json"     // one JSON array of objects per result, one row a line
	FormatMarkdown Format = "markdown" // a pipe table per result
)

// Formats lists the formats in the order the help text names them.
var Formats = []Format{FormatTable, FormatCSV, FormatJSON, FormatMarkdown}

// ParseFormat returns the format named s.
func ParseFormat(s string) (Format, error) {
	for _, f := range Formats {
		if string(f) == s {
			return f, nil
		}
	}
	return "", fmt.Errorf("unknown format %q (want table, csv, json or markdown)", s)
}

// maxCellWidth caps a table cell so that one long text does not push every other
// column off the screen; the other formats never cut values.
const maxCellWidth = 60

// Result is one result set, read in full.
type Result struct {
	Columns []string
	Types   []string // DuckDB type names, as the driver reports them
	Rows    [][]any
}

func (r *Result) numeric(col int) bool {
	t := r.Types[col]
	for _, p := range []string{"TINYINT", "SMALLINT", "INTEGER", "BIGINT", "HUGEINT", "UTINYINT", "USMALLINT", "UINTEGER", "UBIGINT", "UHUGEINT", "FLOAT", "DOUBLE", "DECIMAL"} {
		if strings.HasPrefix(t, p) {
			return true
		}
	}
	return false
}

// write renders r in format f.
func write(w io.Writer, f Format, r *Result) error {
	switch f {
	case FormatCSV:
		return writeCSV(w, r)
	case FormatJSON:
		return writeJSON(w, r)
	case FormatMarkdown:
		return writeMarkdown(w, r)
	default:
		return writeTable(w, r)
	}
}

func rowCount(n int) string {
	if n == 1 {
		return "1 row"
	}
	return strconv.Itoa(n) + " rows"
}

func writeTable(w io.Writer, r *Result) error {
	// Each cell is a list of lines: a value holding newlines (an EXPLAIN plan, a long
	// source query) spans several lines of its row.
	cells := make([][][]string, len(r.Rows))
	widths := make([]int, len(r.Columns))
	for j, c := range r.Columns {
		widths[j] = runewidth.StringWidth(c)
	}
	for i, row := range r.Rows {
		cells[i] = make([][]string, len(row))
		for j, v := range row {
			lines := strings.Split(strings.ReplaceAll(text(v, r.Types[j], "NULL"), "\r\n", "\n"), "\n")
			for k, l := range lines {
				lines[k] = clip(strings.NewReplacer("\t", "    ", "\r", `\r`).Replace(l))
				widths[j] = max(widths[j], runewidth.StringWidth(lines[k]))
			}
			cells[i][j] = lines
		}
	}
	var b strings.Builder
	var l strings.Builder
	line := func(vals []string, numeric func(int) bool) {
		l.Reset()
		for j, s := range vals {
			if j > 0 {
				l.WriteString("  ")
			}
			pad := strings.Repeat(" ", widths[j]-runewidth.StringWidth(s))
			if numeric(j) {
				l.WriteString(pad + s)
			} else {
				l.WriteString(s + pad)
			}
		}
		b.WriteString(strings.TrimRight(l.String(), " "))
		b.WriteString("\n")
	}
	plain := func(int) bool { return false }
	line(r.Columns, plain)
	rule := make([]string, len(widths))
	for j, n := range widths {
		rule[j] = strings.Repeat("-", n)
	}
	line(rule, plain)
	vals := make([]string, len(r.Columns))
	for _, row := range cells {
		height := 1
		for _, c := range row {
			height = max(height, len(c))
		}
		for k := range height {
			for j, c := range row {
				vals[j] = ""
				if k < len(c) {
					vals[j] = c[k]
				}
			}
			line(vals, r.numeric)
		}
	}
	b.WriteString(rowCount(len(r.Rows)) + "\n\n")
	_, err := io.WriteString(w, b.String())
	return err
}

func clip(s string) string {
	if runewidth.StringWidth(s) <= maxCellWidth {
		return s
	}
	return runewidth.Truncate(s, maxCellWidth, "…")
}

func oneLine(s string) string {
	if !strings.ContainsAny(s, "\n\r\t") {
		return s
	}
	return strings.NewReplacer("\n", `\n`, "\r", `\r`, "\t", `\t`).Replace(s)
}

func writeCSV(w io.Writer, r *Result) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(r.Columns); err != nil {
		return err
	}
	rec := make([]string, len(r.Columns))
	for _, row := range r.Rows {
		for j, v := range row {
			rec[j] = text(v, r.Types[j], "")
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func writeJSON(w io.Writer, r *Result) error {
	var b strings.Builder
	b.WriteString("[")
	for i, row := range r.Rows {
		if i > 0 {
			b.WriteString(",")
		}
		b.WriteString("\n{")
		for j, v := range row {
			if j > 0 {
				b.WriteString(",")
			}
			k, _ := json.Marshal(r.Columns[j])
			b.Write(k)
			b.WriteString(":")
			val, err := json.Marshal(jsonValue(v, r.Types[j]))
			if err != nil {
				return fmt.Errorf("column %s: %w", r.Columns[j], err)
			}
			b.Write(val)
		}
		b.WriteString("}")
	}
	if len(r.Rows) > 0 {
		b.WriteString("\n")
	}
	b.WriteString("]\n")
	_, err := io.WriteString(w, b.String())
	return err
}

func writeMarkdown(w io.Writer, r *Result) error {
	var b strings.Builder
	esc := strings.NewReplacer("|", `\|`)
	b.WriteString("|")
	for _, c := range r.Columns {
		b.WriteString(" " + esc.Replace(oneLine(c)) + " |")
	}
	b.WriteString("\n|")
	for j := range r.Columns {
		if r.numeric(j) {
			b.WriteString("---:|")
		} else {
			b.WriteString("---|")
		}
	}
	b.WriteString("\n")
	for _, row := range r.Rows {
		b.WriteString("|")
		for j, v := range row {
			b.WriteString(" " + esc.Replace(oneLine(text(v, r.Types[j], "NULL"))) + " |")
		}
		b.WriteString("\n")
	}
	b.WriteString("\n")
	_, err := io.WriteString(w, b.String())
	return err
}

// text renders one value as text; null is the text for NULL.
func text(v any, typ, null string) string {
	switch x := v.(type) {
	case nil:
		return null
	case string:
		return x
	case bool:
		return strconv.FormatBool(x)
	case float64:
		return formatFloat(x, 64)
	case float32:
		return formatFloat(float64(x), 32)
	case time.Time:
		return formatTime(x, typ)
	case []byte:
		return `\x` + hex.EncodeToString(x)
	case duckdb.Decimal:
		return x.String()
	case duckdb.UUID:
		return (&x).String()
	case duckdb.Interval:
		return fmt.Sprintf("%d months %d days %d µs", x.Months, x.Days, x.Micros)
	case []any, map[string]any, duckdb.OrderedMap:
		return nested(x)
	default:
		return fmt.Sprint(x)
	}
}

// nested renders lists as [a, b], structs as {name: value} (fields in name order: the
// driver does not keep their declared order) and maps as {key=value}.
func nested(v any) string {
	switch x := v.(type) {
	case nil:
		return "NULL"
	case string:
		return strconv.Quote(x)
	case []any:
		parts := make([]string, len(x))
		for i, e := range x {
			parts[i] = nested(e)
		}
		return "[" + strings.Join(parts, ", ") + "]"
	case map[string]any:
		keys := make([]string, 0, len(x))
		for k := range x {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		parts := make([]string, len(keys))
		for i, k := range keys {
			parts[i] = k + ": " + nested(x[k])
		}
		return "{" + strings.Join(parts, ", ") + "}"
	case duckdb.OrderedMap:
		keys := x.Keys()
		parts := make([]string, len(keys))
		for i, k := range keys {
			val, _ := x.Get(k)
			parts[i] = nested(k) + "=" + nested(val)
		}
		return "{" + strings.Join(parts, ", ") + "}"
	default:
		return text(x, "", "NULL")
	}
}

// formatFloat writes plain decimals for everyday magnitudes and exponents outside
// them, always the shortest text that reads back as the same value.
func formatFloat(f float64, bits int) string {
	if f == 0 {
		f = 0 // no "-0": rounding a small negative number gives it, and it reads as a sign error
	}
	a := math.Abs(f)
	if a != 0 && (a < 1e-4 || a >= 1e15) {
		return strconv.FormatFloat(f, 'g', -1, bits)
	}
	return strconv.FormatFloat(f, 'f', -1, bits)
}

func formatTime(t time.Time, typ string) string {
	switch {
	case typ == "DATE":
		return t.Format("2006-01-02")
	case strings.HasPrefix(typ, "TIME") && !strings.HasPrefix(typ, "TIMESTAMP"):
		return t.Format("15:04:05.999999")
	case strings.Contains(typ, "TZ") || strings.Contains(typ, "TIME ZONE"):
		return t.Format("2006-01-02 15:04:05.999999Z07:00")
	default:
		return t.Format("2006-01-02 15:04:05.999999")
	}
}

// jsonValue turns a driver value into something encoding/json writes faithfully.
func jsonValue(v any, typ string) any {
	switch x := v.(type) {
	case float64:
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return formatFloat(x, 64)
		}
		return x
	case float32:
		if math.IsNaN(float64(x)) || math.IsInf(float64(x), 0) {
			return formatFloat(float64(x), 32)
		}
		return json.Number(formatFloat(float64(x), 32)) // the float32's own shortest digits
	case time.Time, []byte, duckdb.UUID, duckdb.Interval:
		return text(x, typ, "")
	case duckdb.Decimal:
		return json.Number(x.String())
	case []any:
		out := make([]any, len(x))
		for i, e := range x {
			out[i] = jsonValue(e, "")
		}
		return out
	case map[string]any:
		out := make(map[string]any, len(x))
		for k, e := range x {
			out[k] = jsonValue(e, "")
		}
		return out
	case duckdb.OrderedMap:
		out := make(map[string]any, x.Len())
		for _, k := range x.Keys() {
			e, _ := x.Get(k)
			out[text(k, "", "null")] = jsonValue(e, "")
		}
		return out
	default:
		return x
	}
}
