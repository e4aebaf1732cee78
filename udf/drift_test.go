package udf

import (
	"database/sql"
	"testing"

	"github.com/copse-dev/copse/forest"
)

type driftRow struct {
	psi    float64
	status string
}

func driftRows(t *testing.T, db *sql.DB, q string) (map[string]driftRow, []string) {
	t.Helper()
	rows, err := db.Query(q)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	out := map[string]driftRow{}
	var order []string
	for rows.Next() {
		var f, s string
		var p float64
		if err := rows.Scan(&f, &p, &s); err != nil {
			t.Fatal(err)
		}
		out[f] = driftRow{p, s}
		order = append(order, f)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out, order
}

// copse_drift end to end, with the check (thresholds 0.10 / 0.25 common
// practice in credit scoring): fresh rows drawn like the training rows are stable in
// every input; x1 (uniform on [0, 1), standard deviation 1/√12) moved up by one standard
// deviation is shifted and the rest stay stable. The values equal the engine's on the
// same columns. Forests add the '(score)' row, stable for the fresh rows; a single tree,
// which keeps no out-of-bag scores, does not.
func TestDriftSQL(t *testing.T) {
	h, models := evalSetup(t)
	m := models["bin"]
	mustExec(t, h.db, "CREATE TABLE shifted AS SELECT * REPLACE (x1 + 1 / sqrt(12) AS x1) FROM new_rows")
	for _, c := range []struct {
		source, shifted string
	}{{"new_rows", ""}, {"shifted", "x1"}} {
		got, order := driftRows(t, h.db, "SELECT feature, psi, status FROM copse_drift('bin', '"+c.source+"')")
		want, err := m.Drift(engineCols(t, h.db, m, "SELECT * FROM "+c.source), nil)
		if err != nil {
			t.Fatal(err)
		}
		sd, err := m.ScoreDrift(engineCols(t, h.db, m, "SELECT * FROM "+c.source))
		if err != nil {
			t.Fatal(err)
		}
		want = append(want, sd)
		want[len(want)-1].Feature = "(score)"
		if len(order) != len(want) {
			t.Fatalf("%s: rows %v, want one per feature and the score", c.source, order)
		}
		for f, w := range want {
			g := got[w.Feature]
			if order[f] != w.Feature || g.psi != w.PSI || g.status != w.Status {
				t.Errorf("%s: row %d %s %+v, engine %+v", c.source, f, order[f], g, w)
			}
			t.Logf("%s: %s PSI %.4f %s", c.source, w.Feature, g.psi, g.status)
			if c.shifted != "" && w.Feature == "(score)" {
				// x1 drives the target: its shift moves the score out of "stable".
				if !(g.psi >= 0.1) {
					t.Errorf("%s: score %+v, want PSI of at least 0.1", c.source, g)
				}
			} else if w.Feature == c.shifted {
				if !(g.psi > 0.25) || g.status != "shifted" {
					t.Errorf("%s: %s %+v, want PSI above 0.25", c.source, w.Feature, g)
				}
			} else if !(g.psi < 0.1) || g.status != "stable" {
				t.Errorf("%s: %s %+v, want PSI below 0.1", c.source, w.Feature, g)
			}
		}
	}

	// A single tree keeps no out-of-bag scores: no score row.
	genTable(t, h.db, "train_rows", 3000, 1, false)
	tree := trainOn(t, h, "one_tree", "SELECT id, "+genFeatures+", y_binary FROM train_rows", "y_binary", smallParams(forest.MethodTree, 1))
	if _, order := driftRows(t, h.db, "SELECT * FROM copse_drift('one_tree', 'new_rows')"); len(order) != len(tree.Features) {
		t.Errorf("rows %v, want one per feature and no score row", order)
	}
}

// Bad calls name the fault and leave the catalog as it was.
func TestDriftSQLErrors(t *testing.T) {
	h, _ := evalSetup(t)
	for _, c := range []struct {
		q    string
		want []string
	}{
		{"FROM copse_drift('nope', 'new_rows')", []string{"copse_drift", "model not found", `"nope"`}},
		{"FROM copse_drift('bin', 'SELECT x1, colour FROM new_rows')", []string{"copse_drift", `"x2"`}},
		{"FROM copse_drift('bin', 'SELECT * REPLACE (''a'' AS x1) FROM new_rows')", []string{"copse_drift", `"x1"`, "numeric"}},
		{"FROM copse_drift('bin', 'no_such_table')", []string{"copse_drift", "no_such_table"}},
		{"FROM copse_drift('bin', 'SELECT * FROM new_rows WHERE false')", []string{"copse_drift", "no rows"}},
		{"FROM copse_drift('bin', NULL)", []string{"copse_drift", "NULL"}},
	} {
		trWantErr(t, h.db, c.q, c.want...)
	}
}
