package udf

import (
	"fmt"
	"strconv"
	"testing"
)

// copse_oob's actual column is the target of each training row, matched to its key, as
// the training source holds it (testdata/iris.csv: Fisher 1936, see testdata/README.md;
// friedman1_train.csv for regression).
func TestOOBActualFromTraining(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, `CREATE TABLE iris AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/iris.csv')`)
	trExec(t, db, `CREATE TABLE fr AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/friedman1_train.csv')`)
	trExec(t, db, `CALL copse_train('iris_rf', 'iris', target := 'species', key := 'id', trees := 10, seed := 3)`)
	trExec(t, db, `CALL copse_train('fr_rf', 'fr', target := 'y', key := 'id', trees := 10, seed := 3)`)

	got := trRows(t, db, `SELECT count(*), count(o.actual), sum(CASE WHEN o.actual = i.species THEN 1 ELSE 0 END)
		FROM copse_oob('iris_rf') o JOIN iris i ON o.key = CAST(i.id AS VARCHAR)`)
	if fmt.Sprint(got) != "[[150 150 150]]" {
		t.Errorf("iris: rows, actuals, matches = %v, want 150 each", got)
	}
	got = trRows(t, db, `SELECT count(*), sum(CASE WHEN o.actual = f.y THEN 1 ELSE 0 END)
		FROM copse_oob('fr_rf') o JOIN fr f ON o.key = CAST(f.id AS VARCHAR)`)
	if fmt.Sprint(got) != "[[2000 2000]]" {
		t.Errorf("friedman: rows, exact matches = %v, want 2000 each", got)
	}
	// The error rate over the rows with votes equals the OOB metric stored for the model.
	got = trRows(t, db, `SELECT avg(CASE WHEN predicted <> actual THEN 1.0 ELSE 0.0 END) FROM copse_oob('iris_rf') WHERE trees_voting > 0`)
	var want float64
	if err := db.QueryRow(`SELECT oob_value FROM copse_models() WHERE name = 'iris_rf'`).Scan(&want); err != nil {
		t.Fatal(err)
	}
	if v, _ := strconv.ParseFloat(got[0][0], 64); v-want > 1e-12 || want-v > 1e-12 {
		t.Errorf("error rate from copse_oob %v, stored OOB error %v", v, want)
	}
}
