package udf

import (
	"context"
	"fmt"
	"strings"
	"testing"
)

// A NULL literal inside struct_pack has DuckDB's NULL type: the documented policy is
// that NULL values inside the row are missing values and are scored, not an error.
func TestReviewNullTypedFieldIsMissing(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE rv AS SELECT (i % 7)::DOUBLE AS x, (i % 5)::DOUBLE AS z, (i % 7 > 3) AS y FROM range(300) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('rv', 'rv', target := 'y', trees := 5, seed := 1)`)
	want := trRows(t, db, `SELECT copse_score('rv', {'x': 5.0, 'z': CAST(NULL AS DOUBLE)})`)
	got, err := trQuery(db, `SELECT copse_score('rv', {'x': 5.0, 'z': NULL})`)
	if err != nil {
		t.Fatalf("a NULL field: %v", err)
	}
	if got[0][0] != want[0][0] {
		t.Errorf("NULL field scored %s, a typed NULL %s", got[0][0], want[0][0])
	}
}

// A model name given as a parameter of a prepared statement: at PREPARE its type is
// not yet known, but DuckDB casts it to the declared VARCHAR before the executor runs.
func TestReviewPreparedModelParameter(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE pp AS SELECT (i % 7)::DOUBLE AS x, (i % 7 > 3) AS y FROM range(300) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('pp', 'pp', target := 'y', trees := 3, seed := 1)`)
	want := trRows(t, db, `SELECT copse_score('pp', pp) FROM pp ORDER BY x LIMIT 3`)
	conn, err := db.Conn(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	if _, err := conn.ExecContext(context.Background(), `PREPARE p AS SELECT copse_score($1, pp) FROM pp ORDER BY x LIMIT 3`); err != nil {
		t.Fatal(err)
	}
	got, err := trQuery(conn, `EXECUTE p('pp')`)
	if err != nil {
		t.Fatalf("EXECUTE p('pp'): %v", err)
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("EXECUTE p('pp') = %v, want %v", got, want)
	}
}

// The executor loads a model named by a parameter under the context attached when
// EXECUTE runs, not the PREPARE statement's, which is over (the command cancels each
// statement's context when it ends).
func TestReviewPreparedModelParameterAttached(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE pa AS SELECT (i % 7)::DOUBLE AS x, (i % 7 > 3) AS y FROM range(300) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('pa', 'pa', target := 'y', trees := 3, seed := 1)`)
	conn, err := db.Conn(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	run := func(q string) ([][]string, error) {
		ctx, cancel := context.WithCancel(context.Background())
		defer cancel()
		release, err := h.Attach(ctx, conn)
		if err != nil {
			t.Fatal(err)
		}
		defer release()
		return trQuery(conn, q)
	}
	if _, err := run(`PREPARE p AS SELECT copse_score($1, pa) FROM pa LIMIT 3`); err != nil {
		t.Fatal(err)
	}
	if _, err := run(`EXECUTE p('pa')`); err != nil {
		t.Errorf("EXECUTE p('pa'): %v", err)
	}
}

// copse_predict takes the same query text copse_train does: a final semicolon, a
// trailing or leading comment.
func TestReviewPredictQueryText(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE pq AS SELECT (i % 7)::DOUBLE AS x, (i % 7 > 3) AS y FROM range(50) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('pq', 'pq', target := 'y', trees := 3, seed := 1)`)
	for _, src := range []string{"SELECT * FROM pq;", "SELECT * FROM pq -- every row", "-- every row\nSELECT * FROM pq"} {
		q := `SELECT count(*) FROM copse_predict('pq', '` + sqlEscape(src) + `')`
		got, err := trQuery(db, q)
		if err != nil {
			t.Errorf("%s: %v", q, err)
		} else if got[0][0] != "50" {
			t.Errorf("%s: %v rows, want 50", q, got[0][0])
		}
	}
}

// A source holding several statements runs none of them: not at bind (EXPLAIN), not
// in a training that then fails; and the error is not an internal one.
func TestReviewSourceSeveralStatements(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE keep AS SELECT 1 AS a`)
	for _, src := range []string{
		"range(3) ; DROP TABLE keep; SELECT (1)",
		"SELECT 1) AS a; DROP TABLE keep; SELECT * FROM (SELECT 1",
	} {
		for _, q := range []string{
			`EXPLAIN SELECT * FROM copse_train('pwn', '` + sqlEscape(src) + `', target := 'range')`,
			`SELECT * FROM copse_train('pwn', '` + sqlEscape(src) + `', target := 'range')`,
		} {
			_, err := trQuery(db, q)
			if err == nil || strings.Contains(err.Error(), "internal error") {
				t.Errorf("%s: error %v, want one about the source", q, err)
			}
			if _, err := trQuery(db, `SELECT * FROM keep`); err != nil {
				t.Fatalf("%s dropped a table: %v", q, err)
			}
		}
	}
}

// A NULL key is NULL in copse_oob, not an empty string (which a CAST(key AS BIGINT)
// join refuses), and an empty-text key stays empty.
func TestReviewOOBNullKey(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE nk AS SELECT (i % 7)::DOUBLE AS x, (i % 7 > 3) AS y,
		CASE WHEN i = 2 THEN NULL WHEN i = 3 THEN '' ELSE i::VARCHAR END AS k FROM range(60) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('nk', 'nk', target := 'y', key := 'k', trees := 3, seed := 1)`)
	got := trRows(t, db, `SELECT coalesce(key, 'NULL!') FROM copse_oob('nk') LIMIT 4`)
	if fmt.Sprint(got) != "[[0] [1] [NULL!] []]" {
		t.Errorf("keys %v, want [[0] [1] [NULL!] []]", got)
	}
	// Keys without NULLs keep the plain path.
	trRows(t, db, `SELECT * FROM copse_train('nk2', 'SELECT * FROM nk WHERE k IS NOT NULL', target := 'y', key := 'k', trees := 3, seed := 1)`)
	if n := trRows(t, db, `SELECT count(*) FROM copse_oob('nk2') WHERE key IS NULL`); n[0][0] != "0" {
		t.Errorf("%s NULL keys without any NULL key", n[0][0])
	}
}

// copse_importance's method ignores case, as copse_train's method and task do.
func TestReviewImportanceMethodCase(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE ic AS SELECT (i % 7)::DOUBLE AS x, (i % 5)::DOUBLE AS z, (i % 7 > 3) AS y FROM range(200) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('ic', 'ic', target := 'y', method := 'Forest', trees := 5, seed := 1)`)
	for _, m := range []string{"Impurity", "PERMUTATION"} {
		if _, err := trQuery(db, `SELECT * FROM copse_importance('ic', method := '`+m+`')`); err != nil {
			t.Errorf("method := '%s': %v", m, err)
		}
	}
}

// A model name or class from an ENUM column: DuckDB casts it to the declared VARCHAR,
// and the executor reads it as such.
func TestReviewEnumNameAndClass(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE en AS SELECT (i % 7)::DOUBLE AS x, (i % 3)::VARCHAR AS y,
		'en'::ENUM('en') AS name, '1'::ENUM('0', '1', '2') AS cls FROM range(200) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('en', 'en', target := 'y', exclude := ['name', 'cls'], trees := 3, seed := 1)`)
	want := trRows(t, db, `SELECT copse_score('en', {'x': x}, '1') FROM en LIMIT 3`)
	got, err := trQuery(db, `SELECT copse_score(name, {'x': x}, cls) FROM en LIMIT 3`)
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("got %v, want %v", got, want)
	}
}

// The decoded-model cache must not serve a model whose catalog rows are gone once the
// same name and version hold another model: here the rows were deleted by hand (which
// evicts nothing) and the name retrained, so version 1 is a new model.
func TestReviewCacheAfterVersionReuse(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE cr AS SELECT (i % 7)::DOUBLE AS x, (i % 7 > 3) AS y, (i % 7 <= 3) AS y2 FROM range(300) r(i)`)
	trRows(t, db, `SELECT * FROM copse_train('cr', 'cr', target := 'y', exclude := ['y2'], trees := 3, seed := 1)`)
	before := trRows(t, db, `SELECT copse_score('cr', {'x': 6.0})`)[0][0]
	// Editing the catalog by hand (both tables) makes the next training reuse version 1.
	trExec(t, db, `DELETE FROM copse.models WHERE name = 'cr'`)
	trExec(t, db, `DELETE FROM copse.model_versions WHERE name = 'cr'`)
	trRows(t, db, `SELECT * FROM copse_train('cr', 'cr', target := 'y2', exclude := ['y'], trees := 3, seed := 1)`)
	m, e := trModel(t, h, "cr")
	if e.Version != 1 || m.Target != "y2" {
		t.Fatalf("cr: version %d, target %q; want version 1 of the retrained model (target y2)", e.Version, m.Target)
	}
	if after := trRows(t, db, `SELECT copse_score('cr', {'x': 6.0})`)[0][0]; after == before {
		t.Errorf("score %s after retraining on the opposite target: the old model's", after)
	}
}
