package udf

import (
	"context"
	"database/sql"
	"fmt"
	"math"
	"path/filepath"
	"testing"
)

// typesTable holds a DATE feature d, a TIMESTAMP feature ts, a number x and a target y
// that follows d.
func typesTable(t *testing.T, db *sql.DB) {
	t.Helper()
	trExec(t, db, `CREATE TABLE tt AS SELECT i, DATE '2020-01-01' + (i % 90)::INTEGER AS d,
		TIMESTAMP '2020-01-01 00:00:00' + to_hours(i % 90) AS ts, (i % 7)::DOUBLE AS x,
		((i % 90) * 1.5 + (i % 7))::DOUBLE AS y FROM range(400) r(i)`)
}

// A feature trained from a DATE column counts days; a TIMESTAMP field gives seconds.
// Scoring one with the other is refused, naming the model, the feature and both types.
func TestReviewTypesDateVersusTimestamp(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	typesTable(t, db)
	trRows(t, db, `SELECT * FROM copse_train('dm', 'SELECT d, x, y FROM tt', target := 'y', trees := 5, seed := 1)`)
	if got := trRows(t, db, `SELECT feature_types FROM copse.models WHERE name = 'dm'`); fmt.Sprint(got) != "[[[date number]]]" {
		t.Errorf("feature_types of dm: %v, want [date number]", got)
	}
	trWantErr(t, db, `SELECT copse_score('dm', {'d': ts, 'x': x}) FROM tt`, `"dm"`, `"d"`, "DATE", "TIMESTAMP", "CAST(")

	// The DATE itself scores, as the engine does.
	got := queryFloats(t, db, `SELECT copse_score('dm', {'d': d, 'x': x}) FROM tt ORDER BY i`)
	m, _ := trModel(t, h, "dm")
	want := enginePredict(t, db, m, `SELECT d, x FROM tt ORDER BY i`)
	if len(got) != len(want) || len(got) != 400 {
		t.Fatalf("%d scores, %d engine predictions; want 400", len(got), len(want))
	}
	for i := range got {
		if math.Abs(got[i]-want[i]) > 1e-9*math.Max(1, math.Abs(want[i])) {
			t.Fatalf("row %d: copse_score %v, engine %v", i, got[i], want[i])
		}
	}

	// The reverse: trained from a TIMESTAMP, given a DATE.
	trRows(t, db, `SELECT * FROM copse_train('tm', 'SELECT ts, x, y FROM tt', target := 'y', trees := 5, seed := 1)`)
	trWantErr(t, db, `SELECT copse_score('tm', {'ts': d, 'x': x}) FROM tt`, `"tm"`, `"ts"`, "TIMESTAMP", "DATE", "CAST(")
	trRows(t, db, `SELECT copse_score('tm', {'ts': ts, 'x': x}) FROM tt`)

	// Numbers and booleans still feed a DATE-trained feature, as before.
	trRows(t, db, `SELECT copse_score('dm', {'d': 18300, 'x': true})`)

	// A blend keeps its members' kinds.
	trRows(t, db, `SELECT * FROM copse_blend('bm', members := ['dm'])`)
	if got := trRows(t, db, `SELECT feature_types FROM copse.models WHERE name = 'bm'`); fmt.Sprint(got) != "[[[date number]]]" {
		t.Errorf("feature_types of bm: %v, want [date number]", got)
	}
	trWantErr(t, db, `SELECT copse_score('bm', {'d': ts, 'x': x}) FROM tt`, `"bm"`, `"d"`, "DATE", "TIMESTAMP")
}

// Models saved without kinds (NULL, as older builds and hand edits leave them) score as
// before, with any numeric field.
func TestReviewTypesNullKinds(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	typesTable(t, db)
	trRows(t, db, `SELECT * FROM copse_train('dm', 'SELECT d, x, y FROM tt', target := 'y', trees := 5, seed := 1)`)
	trExec(t, db, `UPDATE copse.models SET feature_types = NULL WHERE name = 'dm'`)
	if got := trRows(t, db, `SELECT copse_score('dm', {'d': ts, 'x': x}) FROM tt`); len(got) != 400 {
		t.Errorf("%d scores, want 400", len(got))
	}
	if got := trRows(t, db, `SELECT copse_score('dm', {'d': d, 'x': x}) FROM tt`); len(got) != 400 {
		t.Errorf("%d scores, want 400", len(got))
	}
	// A blend of a member without kinds records none.
	trRows(t, db, `SELECT * FROM copse_blend('bm', members := ['dm'])`)
	if got := trRows(t, db, `SELECT feature_types IS NULL FROM copse.models WHERE name = 'bm'`); fmt.Sprint(got) != "[[true]]" {
		t.Errorf("feature_types IS NULL of bm: %v, want true", got)
	}
	trRows(t, db, `SELECT copse_score('bm', {'d': ts, 'x': x}) FROM tt`)
}

// A catalog an older build created, without feature_types, gains the column when a host
// opens it, and trains and scores.
func TestReviewTypesOldCatalog(t *testing.T) {
	path := filepath.Join(t.TempDir(), "old.duckdb")
	old, err := sql.Open("duckdb", path)
	if err != nil {
		t.Fatal(err)
	}
	trExec(t, old, `CREATE SCHEMA copse`)
	trExec(t, old, `CREATE TABLE copse.models (
	name VARCHAR NOT NULL, version INTEGER NOT NULL, method VARCHAR NOT NULL, task VARCHAR NOT NULL,
	target VARCHAR NOT NULL, rows BIGINT NOT NULL, features INTEGER NOT NULL, trees INTEGER NOT NULL,
	oob_metric VARCHAR, oob_value DOUBLE, created_at TIMESTAMP NOT NULL, size_bytes BIGINT NOT NULL,
	source VARCHAR NOT NULL, row_keys VARCHAR[], row_actual VARCHAR[], model BLOB NOT NULL,
	PRIMARY KEY (name, version))`)
	if err := old.Close(); err != nil {
		t.Fatal(err)
	}
	h, err := Open(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { h.Close() })
	db := h.DB()
	if got := trRows(t, db, `SELECT data_type FROM information_schema.columns
		WHERE table_schema = 'copse' AND table_name = 'models' AND column_name = 'feature_types'`); fmt.Sprint(got) != "[[VARCHAR[]]]" {
		t.Fatalf("feature_types column: %v, want VARCHAR[]", got)
	}
	typesTable(t, db)
	trRows(t, db, `SELECT * FROM copse_train('dm', 'SELECT d, x, y FROM tt', target := 'y', trees := 5, seed := 1)`)
	if got := trRows(t, db, `SELECT feature_types FROM copse.models WHERE name = 'dm'`); fmt.Sprint(got) != "[[[date number]]]" {
		t.Errorf("feature_types of dm: %v, want [date number]", got)
	}
	trRows(t, db, `SELECT copse_score('dm', {'d': d, 'x': x}) FROM tt`)
	trWantErr(t, db, `SELECT copse_score('dm', {'d': ts, 'x': x}) FROM tt`, `"d"`, "DATE", "TIMESTAMP")
}
