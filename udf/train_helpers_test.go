package udf

import (
	"bytes"
	"context"
	"database/sql"
	"fmt"
	"strings"
	"testing"

	"github.com/copse-dev/copse/forest"
)

func trExec(t testing.TB, db *sql.DB, q string) {
	t.Helper()
	if _, err := db.Exec(q); err != nil {
		t.Fatalf("%s: %v", q, err)
	}
}

// trQuery runs q and returns every row as text, or the first error (bind, fill or
// reading rows).
func trQuery(db interface {
	QueryContext(context.Context, string, ...any) (*sql.Rows, error)
}, q string) ([][]string, error) {
	rows, err := db.QueryContext(context.Background(), q)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	cols, err := rows.Columns()
	if err != nil {
		return nil, err
	}
	var out [][]string
	for rows.Next() {
		vals := make([]any, len(cols))
		ptrs := make([]any, len(cols))
		for i := range vals {
			ptrs[i] = &vals[i]
		}
		if err := rows.Scan(ptrs...); err != nil {
			return nil, err
		}
		row := make([]string, len(cols))
		for i, v := range vals {
			if v == nil {
				row[i] = "NULL"
			} else {
				row[i] = fmt.Sprint(v)
			}
		}
		out = append(out, row)
	}
	return out, rows.Err()
}

// trRows is trQuery that fails the test on error.
func trRows(t testing.TB, db *sql.DB, q string) [][]string {
	t.Helper()
	rows, err := trQuery(db, q)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	return rows
}

// trCatalog is everything the catalog holds, as copse_models() lists it plus each
// version's encoded model and keys, for before/after comparisons.
func trCatalog(t testing.TB, db *sql.DB) string {
	t.Helper()
	var b strings.Builder
	for _, r := range trRows(t, db, "SELECT * FROM copse_models()") {
		fmt.Fprintln(&b, strings.Join(r, " | "))
	}
	for _, r := range trRows(t, db, "SELECT name, version, md5(model), row_keys FROM "+catalogTable+" ORDER BY name, version") {
		fmt.Fprintln(&b, strings.Join(r, " | "))
	}
	return b.String()
}

// trWantErr runs q, wants an error holding every one of want, and wants the catalog
// exactly as it was.
func trWantErr(t *testing.T, db *sql.DB, q string, want ...string) {
	t.Helper()
	before := trCatalog(t, db)
	_, err := trQuery(db, q)
	if err == nil {
		t.Errorf("%s: no error, want one naming %q", q, want)
	} else {
		for _, w := range want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s:\nerror %q\ndoes not name %q", q, err, w)
			}
		}
	}
	if after := trCatalog(t, db); after != before {
		t.Errorf("%s: the catalog changed:\nbefore\n%safter\n%s", q, before, after)
	}
}

// trModel loads a model version from the catalog.
func trModel(t testing.TB, h *Host, ref string) (*forest.Model, Entry) {
	t.Helper()
	m, e, err := h.loadModel(context.Background(), ref)
	if err != nil {
		t.Fatal(err)
	}
	return m, e
}

// trSameModel wants the catalog's model and the engine's to encode to the same bytes.
func trSameModel(t testing.TB, h *Host, ref string, d *forest.Dataset, p forest.Params) {
	t.Helper()
	got, _ := trModel(t, h, ref)
	want, err := forest.Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	gb, err := got.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	wb, err := want.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(gb, wb) {
		t.Errorf("%s: the model trained from SQL (%d bytes) differs from the engine's on the same data (%d bytes)\n"+
			"SQL:    classes %q, features %v\nengine: classes %q, features %v",
			ref, len(gb), len(wb), got.Classes, featureSummary(got), want.Classes, featureSummary(want))
	}
}

func featureSummary(m *forest.Model) []string {
	out := make([]string, len(m.Features))
	for i, f := range m.Features {
		out[i] = fmt.Sprintf("%s:%v%q", f.Name, f.Kind, f.Levels)
	}
	return out
}
