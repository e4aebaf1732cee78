package udf

import (
	"context"
	"database/sql"
	"math"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// stmtFloats runs a prepared statement and returns its single DOUBLE column.
func stmtFloats(t testing.TB, stmt *sql.Stmt, args ...any) []float64 {
	t.Helper()
	rows, err := stmt.Query(args...)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var out []float64
	for rows.Next() {
		var v sql.NullFloat64
		if err := rows.Scan(&v); err != nil {
			t.Fatal(err)
		}
		out = append(out, v.Float64)
		if !v.Valid {
			out[len(out)-1] = math.NaN()
		}
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// TestScorePreparedFollowsLatest: a prepared statement that names 'm' scores with the
// version that is latest when it runs, not the one it saw when prepared; 'm@1' stays
// pinned. Each form of the model name is checked: a constant, a parameter, a column.
func TestScorePreparedFollowsLatest(t *testing.T) {
	h := openHost(t)
	genTable(t, h.db, "train_rows", 500, 1, false)
	const q = "SELECT x1, x2, y_value FROM train_rows"
	const rows = "SELECT * FROM train_rows ORDER BY id"
	m1 := trainOn(t, h, "m", q, "y_value", smallParams(forest.MethodForest, 3))
	want1 := enginePredict(t, h.db, m1, rows)

	stmts := []struct {
		name string
		sql  string
		args []any
	}{
		{"constant", "SELECT copse_score('m', r) FROM train_rows r ORDER BY id", nil},
		{"parameter", "SELECT copse_score(?, r) FROM train_rows r ORDER BY id", []any{"m"}},
		{"column", "SELECT copse_score(n.name, r) FROM train_rows r, (SELECT 'm' AS name) n ORDER BY id", nil},
		{"pinned", "SELECT copse_score('m@1', r) FROM train_rows r ORDER BY id", nil},
	}
	prepared := make([]*sql.Stmt, len(stmts))
	for i, s := range stmts {
		stmt, err := h.db.Prepare(s.sql)
		if err != nil {
			t.Fatal(err)
		}
		defer stmt.Close()
		prepared[i] = stmt
		sameBits(t, s.name+" before retraining", stmtFloats(t, stmt, s.args...), want1)
	}

	p := smallParams(forest.MethodForest, 3)
	p.Seed = 42
	m2 := trainOn(t, h, "m", q, "y_value", p)
	want2 := enginePredict(t, h.db, m2, rows)
	if math.Float64bits(want1[0]) == math.Float64bits(want2[0]) && math.Float64bits(want1[1]) == math.Float64bits(want2[1]) {
		t.Fatal("the two versions score alike: the test cannot tell them apart")
	}
	for i, s := range stmts {
		want := want2
		if s.name == "pinned" {
			want = want1
		}
		t.Run(s.name, func(t *testing.T) {
			sameBits(t, "after retraining", stmtFloats(t, prepared[i], s.args...), want)
		})
	}
	if t.Failed() {
		return
	}

	// Dropping the latest version: 'm' falls back to version 1 at the next execution.
	if _, err := h.db.ExecContext(context.Background(), "SELECT * FROM copse_drop('m@2')"); err != nil {
		t.Fatal(err)
	}
	for i, s := range stmts {
		sameBits(t, s.name+" after dropping version 2", stmtFloats(t, prepared[i], s.args...), want1)
	}
}
