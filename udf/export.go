package udf

import (
	"context"
	"database/sql"
	"fmt"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// Export formats.
const (
	exportSQL  = "sql"
	exportPMML = "pmml" // the PMML 4.4 document (forest.Model.ExportPMML), as copse_pmml writes it
)

// registerExport registers copse_export.
func (h *Host) registerExport(conn *sql.Conn) error {
	return duck.RegisterTable(conn, duck.TableFunc{Name: "copse_export", Args: []duck.Type{duck.Varchar},
		Named: []duck.Param{{Name: "format", Type: duck.Varchar}, {Name: "dialect", Type: duck.Varchar},
			{Name: "relation", Type: duck.Varchar}, {Name: "key", Type: duck.Varchar}, {Name: "class", Type: duck.Varchar}},
		Bind: h.bindExport})
}

// ExportOptions are copse_export's options, shared with the command line.
type ExportOptions struct {
	Format   string // "sql" ("" too)
	Dialect  string // "standard" ("" too), "duckdb" or "postgres"
	Relation string // the input relation ("" : forest.DefaultSQLRelation)
	Key      string // an input column carried to the output ("" : none)
	Class    string // classification: the class whose probability is the score
}

// bindExport: copse_export(model, format := 'sql', dialect := 'standard', relation :=
// 'input_rows', key := 'id', class := 'name') → one row, one column "text": a SELECT over
// relation that scores each row as copse_score does, runnable without copse (see
// forest.Model.ExportSQL for the layout and its limits); format := 'pmml' gives the PMML
// document instead.
func (h *Host) bindExport(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_export"
	var opt ExportOptions
	for _, o := range []struct {
		name string
		dst  *string
	}{{"format", &opt.Format}, {"dialect", &opt.Dialect}, {"relation", &opt.Relation}, {"key", &opt.Key}, {"class", &opt.Class}} {
		name, dst := o.name, o.dst
		if v, ok := call.Named[name]; ok {
			s, isStr := v.(string)
			if !isStr {
				return nil, fmt.Errorf("%s: %w: %s is NULL", fn, ErrCall, name)
			}
			*dst = s
		}
	}
	if err := checkExportOptions(opt); err != nil {
		return nil, fmt.Errorf("%s: %w", fn, err)
	}
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	text, err := ExportModel(m, e, opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", fn, err)
	}
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "text", Type: duck.Varchar}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(1, func(out *duck.Chunk, j, _ int) { out.SetString(0, j, text) }), nil
		},
	}, nil
}

// checkExportOptions checks the format and dialect names before any model is read.
func checkExportOptions(opt ExportOptions) error {
	switch strings.ToLower(opt.Format) {
	case "", exportSQL:
	case exportPMML:
		if opt.Dialect != "" || opt.Relation != "" || opt.Key != "" || opt.Class != "" {
			return fmt.Errorf("%w: format := 'pmml' takes no dialect, relation, key or class (they shape the SQL text)", ErrCall)
		}
	default:
		return fmt.Errorf("%w: format := '%s': want 'sql' or 'pmml'", ErrCall, sqlEscape(opt.Format))
	}
	switch forest.SQLDialect(strings.ToLower(opt.Dialect)) {
	case "", forest.DialectStandard, forest.DialectDuckDB, forest.DialectPostgres:
	default:
		return fmt.Errorf("%w: dialect := '%s': want 'standard', 'duckdb' or 'postgres'", ErrCall, sqlEscape(opt.Dialect))
	}
	return nil
}

// ExportModel writes a stored model in the format opt names. Dates and timestamps the
// model was trained on must reach the exported SQL as numbers (days or seconds since
// 1970-01-01), as the text's header says.
func ExportModel(m *forest.Model, e Entry, opt ExportOptions) (string, error) {
	if err := checkExportOptions(opt); err != nil {
		return "", err
	}
	if strings.EqualFold(opt.Format, exportPMML) {
		doc, err := m.ExportPMML()
		if err != nil {
			return "", fmt.Errorf("model %q (version %d): %w", e.Name, e.Version, err)
		}
		return string(doc), nil
	}
	so := forest.SQLOptions{
		Dialect:  forest.SQLDialect(strings.ToLower(opt.Dialect)),
		Relation: opt.Relation,
		Class:    opt.Class,
		Title:    fmt.Sprintf("model %q version %d", e.Name, e.Version),
	}
	if opt.Key != "" {
		so.Keys = []string{opt.Key}
	}
	text, err := m.ExportSQL(so)
	if err != nil {
		return "", fmt.Errorf("model %q (version %d): %w", e.Name, e.Version, err)
	}
	if temporal := temporalFeatures(m, e); len(temporal) > 0 {
		text = "-- Give these features as numbers (DATE: days, TIMESTAMP: seconds since 1970-01-01): " +
			strings.Join(temporal, ", ") + "\n" + text
	}
	return text, nil
}

// temporalFeatures names the features trained from DATE or TIMESTAMP columns.
func temporalFeatures(m *forest.Model, e Entry) []string {
	var out []string
	for i, f := range m.Features {
		if i < len(e.FeatureTypes) && (e.FeatureTypes[i] == featDate || e.FeatureTypes[i] == featTimestamp) {
			out = append(out, fmt.Sprintf("%q", f.Name))
		}
	}
	return out
}

// Export loads a stored model ('name' or 'name@3') and writes it as opt says, for the
// command line; copse_export is the same through SQL.
func (h *Host) Export(ctx context.Context, ref string, opt ExportOptions) (string, Entry, error) {
	if err := checkExportOptions(opt); err != nil {
		return "", Entry{}, err
	}
	m, e, err := h.loadModel(ctx, ref)
	if err != nil {
		return "", Entry{}, err
	}
	text, err := ExportModel(m, e, opt)
	return text, e, err
}
