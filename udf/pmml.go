package udf

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strings"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// PMML through SQL: copse_pmml writes a model as a PMML 4.4 document and copse_import
// reads one back as a new version. Both call the engine (forest.Model.ExportPMML,
// forest.ImportPMML); copse_export's format := 'pmml' can call the same ExportPMML.

// importPMML is copse_import's only format so far.
const importPMML = "pmml"

// registerPMML registers copse_pmml and copse_import.
func (h *Host) registerPMML(conn *sql.Conn) error {
	for _, f := range []duck.TableFunc{
		{Name: "copse_pmml", Args: []duck.Type{duck.Varchar}, Bind: h.bindPMML},
		{Name: "copse_import", Args: []duck.Type{duck.Varchar, duck.Varchar},
			Named: []duck.Param{{Name: "format", Type: duck.Varchar}}, Bind: h.bindImport},
	} {
		if err := duck.RegisterTable(conn, f); err != nil {
			return err
		}
	}
	return nil
}

// bindPMML: copse_pmml(model) → one row, one column "text": the model as a PMML 4.4
// document.
func (h *Host) bindPMML(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_pmml"
	m, e, _, err := h.relationModel(fn, call)
	if err != nil {
		return nil, err
	}
	doc, err := m.ExportPMML()
	if err != nil {
		return nil, fmt.Errorf("%s: model %s@%d: %w", fn, e.Name, e.Version, err)
	}
	text := string(doc)
	return &duck.TableBinding{
		Columns: []duck.Column{{Name: "text", Type: duck.Varchar}},
		Init: func() (duck.FillFunc, error) {
			return rowsFill(1, func(out *duck.Chunk, j, _ int) { out.SetString(0, j, text) }), nil
		},
	}, nil
}

// bindImport: copse_import(model, text, format := 'pmml') reads a document that
// copse_pmml wrote and stores its model as a new version of model; one row, as
// copse_train reports. Bind parses and checks the document; the fill saves it, so a
// prepare or EXPLAIN stores nothing.
func (h *Host) bindImport(call duck.TableCall) (*duck.TableBinding, error) {
	const fn = "copse_import"
	name, ok := call.Args[0].(string)
	if !ok {
		return nil, fmt.Errorf("%s: %w: the model name is NULL", fn, ErrCall)
	}
	if err := validModelName(name); err != nil {
		return nil, fmt.Errorf("%s: %w: %v", fn, ErrCall, err)
	}
	if v, ok := call.Named["format"]; ok {
		f, _ := v.(string)
		if !strings.EqualFold(f, importPMML) {
			return nil, fmt.Errorf("%s %q: %w: format := '%s': want 'pmml'", fn, name, ErrCall, sqlEscape(f))
		}
	}
	text, ok := call.Args[1].(string)
	if !ok {
		return nil, fmt.Errorf("%s %q: %w: the document is NULL", fn, name, ErrCall)
	}
	m, err := forest.ImportPMML([]byte(text))
	if err != nil {
		return nil, fmt.Errorf("%s %q: %w", fn, name, err)
	}
	return h.savingBinding(call.ConnID, func(ctx context.Context) (trainResult, error) {
		e, err := h.importModel(ctx, name, m, fmt.Sprintf("imported from PMML (%d bytes)", len(text)))
		return trainResult{entry: e}, err
	}), nil
}

// importModel saves m as a new version of name unless name already holds a model of
// another task, target or class set, which a new version would silently change under
// every query that scores it.
func (h *Host) importModel(ctx context.Context, name string, m *forest.Model, source string) (Entry, error) {
	const fn = "copse_import"
	old, _, err := h.loadModel(ctx, name)
	switch {
	case errors.Is(err, ErrNoModel):
	case err != nil:
		return Entry{}, fmt.Errorf("%s %q: %w", fn, name, err)
	case old.Task != m.Task || old.Target != m.Target || strings.Join(old.Classes, "\x00") != strings.Join(m.Classes, "\x00"):
		return Entry{}, fmt.Errorf("%s %q: the name holds a %s model of %q (classes %q); the document holds a %s model of %q (classes %q): import it under another name or drop the old one",
			fn, name, old.Task, old.Target, old.Classes, m.Task, m.Target, m.Classes)
	}
	e, err := h.saveModel(ctx, name, m, source, nil, nil, nil, nil)
	if err != nil {
		return Entry{}, fmt.Errorf("%s %q: %w", fn, name, err)
	}
	return e, nil
}

// ModelBinary returns the engine's encoding of the model a reference names (the bytes
// forest.Decode reads back) and its catalog entry: what `copse model save` writes.
func (h *Host) ModelBinary(ctx context.Context, ref string) ([]byte, Entry, error) {
	m, e, err := h.loadModel(ctx, ref)
	if err != nil {
		return nil, Entry{}, err
	}
	b, err := m.MarshalBinary()
	if err != nil {
		return nil, Entry{}, fmt.Errorf("encode model %s@%d: %w", e.Name, e.Version, err)
	}
	return b, e, nil
}

// ImportModel stores m as a new version of name, refusing a name that holds a model of
// another task, target or class set (as copse_import does); source is what the catalog
// records as its origin. It is what `copse model load` calls.
func (h *Host) ImportModel(ctx context.Context, name string, m *forest.Model, source string) (Entry, error) {
	if err := validModelName(name); err != nil {
		return Entry{}, err
	}
	return h.importModel(ctx, name, m, source)
}
