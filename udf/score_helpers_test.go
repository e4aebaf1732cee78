package udf

import (
	"context"
	"database/sql"
	"math"
	"strconv"
	"strings"
	"testing"

	"github.com/duckdb/duckdb-go/v2/mapping"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf/internal/duck"
)

// openHost opens an in-memory host that the test closes.
func openHost(t testing.TB) *Host {
	t.Helper()
	h, err := Open(context.Background(), "")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { h.Close() })
	return h
}

func mustExec(t testing.TB, db *sql.DB, q string, args ...any) {
	t.Helper()
	if _, err := db.Exec(q, args...); err != nil {
		t.Fatalf("%s: %v", q, err)
	}
}

// genTable creates name with n rows of made-up data: numeric, VARCHAR, BOOLEAN and DATE
// features with NULLs, an id, and three targets (y_value, y_binary, y_class). seed
// shifts the draws; colour offers one level ('mauve') only when unseen is true.
func genTable(t testing.TB, db *sql.DB, name string, n, seed int, unseen bool) {
	t.Helper()
	colours := "['red', 'green', 'blue', 'teal']"
	if unseen {
		colours = "['red', 'green', 'blue', 'mauve']"
	}
	q := strings.NewReplacer("NAME", name, "N_ROWS", itoa(n), "SEED", itoa(seed), "COLOURS", colours).Replace(`
CREATE OR REPLACE TABLE NAME AS
WITH r AS (
	SELECT i AS id,
		(hash(i * 7 + SEED) % 10000) / 10000.0 AS u1,
		(hash(i * 13 + SEED) % 10000) / 10000.0 AS u2,
		(hash(i * 17 + SEED) % 10000) / 10000.0 AS u3,
		(hash(i * 19 + SEED) % 4)::BIGINT AS c
	FROM range(N_ROWS) t(i)
)
SELECT id,
	u1::DOUBLE AS x1,
	CASE WHEN id % 11 = 3 THEN NULL ELSE (u2 * 10)::DOUBLE END AS x2,
	CASE WHEN id % 17 = 5 THEN NULL ELSE COLOURS[c + 1] END AS colour,
	(u3 > 0.5) AS flag,
	DATE '2024-01-01' + (id % 90)::INTEGER AS day,
	(id % 50)::INTEGER AS small_int,
	(u1 * 3 + coalesce(u2, 0.5) + CASE c WHEN 0 THEN 2 WHEN 1 THEN -1 ELSE 0 END + u3)::DOUBLE AS y_value,
	CASE WHEN u1 + 0.3 * c + 0.2 * (u3 > 0.5)::INTEGER > 0.9 THEN 'late' ELSE 'on time' END AS y_binary,
	CASE WHEN u1 < 0.3 THEN 'low' WHEN c = 2 THEN 'mid' ELSE 'high' END AS y_class
FROM r`)
	mustExec(t, db, q)
}

func itoa(i int) string { return strconv.Itoa(i) }

// readCols reads a query into columns the way copse_train does.
func readCols(t testing.TB, db *sql.DB, q string) map[string]duck.ResultColumn {
	t.Helper()
	cols, err := duck.ReadColumns(context.Background(), db, q, duck.ReadOptions{})
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	out := map[string]duck.ResultColumn{}
	for _, c := range cols {
		out[c.Name] = c
	}
	return out
}

// trainOn trains a model on the query's features (every column but target and id) and
// saves it under name.
func trainOn(t testing.TB, h *Host, name, q, target string, p forest.Params) *forest.Model {
	t.Helper()
	cols, err := duck.ReadColumns(context.Background(), h.db, q, duck.ReadOptions{})
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	n := 0
	if len(cols) > 0 {
		n = max(len(cols[0].Values), len(cols[0].Codes))
	}
	d := forest.NewDataset(n)
	for _, c := range cols {
		switch {
		case c.Name == "id":
		case c.Name == target && c.Codes != nil:
			if err := d.SetClassTarget(c.Name, c.Codes, c.Levels); err != nil {
				t.Fatal(err)
			}
		case c.Name == target:
			if err := d.SetRegressionTarget(c.Name, c.Values); err != nil {
				t.Fatal(err)
			}
		case c.Codes != nil:
			if err := d.AddCategorical(c.Name, c.Codes, c.Levels); err != nil {
				t.Fatal(err)
			}
		default:
			if err := d.AddNumeric(c.Name, c.Values); err != nil {
				t.Fatal(err)
			}
		}
	}
	m, err := forest.Train(context.Background(), d, p)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := h.saveModel(context.Background(), name, m, q, nil, nil, nil, nil); err != nil {
		t.Fatal(err)
	}
	return m
}

// engineCols reads the query's columns in the model's coding: features by exact name,
// categorical values mapped to the model's level codes, unseen levels and NULL as NaN.
func engineCols(t testing.TB, db *sql.DB, m *forest.Model, q string) [][]float64 {
	t.Helper()
	got := readCols(t, db, q)
	cols := make([][]float64, len(m.Features))
	for f, feat := range m.Features {
		c, ok := got[feat.Name]
		if !ok {
			t.Fatalf("%s: no column %q", q, feat.Name)
		}
		if feat.Kind == forest.Numeric {
			cols[f] = c.Values
			continue
		}
		codes := map[string]int{}
		for k, l := range feat.Levels {
			codes[l] = k
		}
		col := make([]float64, len(c.Codes))
		for i, code := range c.Codes {
			col[i] = math.NaN()
			if code >= 0 {
				if k, ok := codes[c.Levels[code]]; ok {
					col[i] = float64(k)
				}
			}
		}
		cols[f] = col
	}
	return cols
}

// enginePredict is the engine's batch prediction of the query's rows.
func enginePredict(t testing.TB, db *sql.DB, m *forest.Model, q string) []float64 {
	t.Helper()
	cols := engineCols(t, db, m, q)
	n := 0
	if len(cols) > 0 {
		n = len(cols[0])
	}
	out := make([]float64, n*m.Width())
	if err := m.Predict(cols, out, 2); err != nil {
		t.Fatal(err)
	}
	return out
}

// queryFloats runs q and returns its single nullable DOUBLE column (NaN for NULL).
func queryFloats(t testing.TB, db *sql.DB, q string, args ...any) []float64 {
	t.Helper()
	rows, err := db.Query(q, args...)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	var out []float64
	for rows.Next() {
		var v sql.NullFloat64
		if err := rows.Scan(&v); err != nil {
			t.Fatal(err)
		}
		if v.Valid {
			out = append(out, v.Float64)
		} else {
			out = append(out, math.NaN())
		}
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// queryStrings runs q and returns its single nullable VARCHAR column ("<NULL>" for NULL).
func queryStrings(t testing.TB, db *sql.DB, q string, args ...any) []string {
	t.Helper()
	rows, err := db.Query(q, args...)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var v sql.NullString
		if err := rows.Scan(&v); err != nil {
			t.Fatal(err)
		}
		out = append(out, v.String)
		if !v.Valid {
			out[len(out)-1] = "<NULL>"
		}
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// sameBits fails unless got and want hold the same float64 bit patterns (NaN = NaN).
func sameBits(t testing.TB, what string, got, want []float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d rows, want %d", what, len(got), len(want))
	}
	for i := range got {
		if math.Float64bits(got[i]) != math.Float64bits(want[i]) && !(math.IsNaN(got[i]) && math.IsNaN(want[i])) {
			t.Fatalf("%s: row %d: got %v want %v", what, i, got[i], want[i])
		}
	}
}

// column returns column k of a row-major matrix of width W.
func column(pred []float64, W, k int) []float64 {
	out := make([]float64, len(pred)/W)
	for i := range out {
		out[i] = pred[i*W+k]
	}
	return out
}

// errText runs q and returns its error text, failing when it succeeds.
func errText(t testing.TB, db *sql.DB, q string, args ...any) string {
	t.Helper()
	rows, err := db.Query(q, args...)
	if err == nil {
		for rows.Next() {
		}
		err = rows.Err()
		rows.Close()
	}
	if err == nil {
		t.Fatalf("%s: no error", q)
	}
	return err.Error()
}

// wantErr fails unless q fails with an error holding every part.
func wantErr(t testing.TB, db *sql.DB, q string, parts ...string) {
	t.Helper()
	msg := errText(t, db, q)
	for _, p := range parts {
		if !strings.Contains(msg, p) {
			t.Errorf("%s:\nerror %q\nlacks %q", q, msg, p)
		}
	}
}

func smallParams(m forest.Method, trees int) forest.Params {
	p := forest.DefaultParams(m)
	if m != forest.MethodTree {
		p.Trees = trees
	}
	p.Threads = 2
	return p
}

// doubleStruct is the bind-time type of a STRUCT of DOUBLE fields.
func doubleStruct(names ...string) duck.TypeInfo {
	t := duck.TypeInfo{ID: mapping.TypeStruct}
	for _, n := range names {
		t.Fields = append(t.Fields, duck.Field{Name: n, Type: duck.TypeInfo{ID: mapping.TypeDouble}})
	}
	return t
}
