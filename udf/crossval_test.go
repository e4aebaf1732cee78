package udf

import (
	"context"
	"database/sql"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// cvHost opens a host with iris (Fisher 1936) and the Wisconsin breast cancer data
// (both as shipped by Debian's python3-sklearn, see testdata/README.md).
func cvHost(t *testing.T) (*Host, *sql.DB) {
	t.Helper()
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE iris AS SELECT * FROM read_csv('../testdata/iris.csv')")
	trExec(t, db, "CREATE TABLE bc AS SELECT * FROM read_csv('../testdata/breast_cancer.csv')")
	return h, db
}

func cvFloat(t testing.TB, s string) float64 {
	t.Helper()
	if s == "NULL" {
		return math.NaN()
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatalf("%q: %v", s, err)
	}
	return v
}

// TestCrossvalSQL checks copse_crossval against the engine's cross-validation of the
// same data read in Go, that the same seed gives the same rows on every run and thread
// count, and that nothing reaches the catalog.
func TestCrossvalSQL(t *testing.T) {
	_, db := cvHost(t)
	before := trCatalog(t, db)
	const q = "SELECT fold, summary, metric, value, rows FROM copse_crossval('iris', target := 'species', folds := 5, trees := 20, seed := 7, threads := %d)"
	first := trRows(t, db, strings.Replace(q, "%d", "1", 1))
	for _, threads := range []string{"1", "2"} {
		if again := trRows(t, db, strings.Replace(q, "%d", threads, 1)); !slices.EqualFunc(again, first, slices.Equal) {
			t.Errorf("threads := %s gave other rows:\n%v\nfirst run:\n%v", threads, again, first)
		}
	}
	if after := trCatalog(t, db); after != before {
		t.Errorf("copse_crossval changed the catalog:\n%s\n%s", before, after)
	}

	d := trCSV(t, "iris.csv", "species")
	p := forest.DefaultParams(forest.MethodForest)
	p.Trees, p.Seed = 20, 7
	folds, err := forest.Folds(d, 5, 7)
	if err != nil {
		t.Fatal(err)
	}
	per, err := forest.CrossValidate(context.Background(), d, p, folds, nil)
	if err != nil {
		t.Fatal(err)
	}
	mean, std := forest.Summarize(per)
	var want [][]string
	for i, ms := range per {
		for _, m := range ms {
			want = append(want, []string{strconv.Itoa(i + 1), "NULL", m.Name, strconv.FormatFloat(m.Value, 'g', -1, 64), strconv.Itoa(len(folds[i]))})
		}
	}
	for _, s := range []struct {
		name string
		ms   []forest.Metric
	}{{"mean", mean}, {"std", std}} {
		for _, m := range s.ms {
			want = append(want, []string{"NULL", s.name, m.Name, strconv.FormatFloat(m.Value, 'g', -1, 64), "NULL"})
		}
	}
	if len(first) != len(want) {
		t.Fatalf("%d rows, want %d:\n%v", len(first), len(want), first)
	}
	for i := range want {
		g, w := first[i], want[i]
		if !slices.Equal(g[:3], w[:3]) || g[4] != w[4] || math.Float64bits(cvFloat(t, g[3])) != math.Float64bits(cvFloat(t, w[3])) {
			t.Errorf("row %d: %v, the engine gives %v", i, g, w)
		}
	}
}

// TestCrossvalNearOOB: the cross-validated error of a forest on the breast cancer data
// is within 2 points of its out-of-bag error, as Breiman (2001, "Random Forests",
// Machine Learning 45:5–32, §3.1) finds the out-of-bag estimate as good as a test set.
func TestCrossvalNearOOB(t *testing.T) {
	_, db := cvHost(t)
	oob := trRows(t, db, "SELECT oob_metric, oob_value FROM copse_train('bc', 'bc', target := 'diagnosis', trees := 100, seed := 3)")
	cv := trRows(t, db, "SELECT value FROM copse_crossval('bc', target := 'diagnosis', trees := 100, seed := 3) WHERE summary = 'mean' AND metric = 'error'")
	if oob[0][0] != "error" || len(cv) != 1 {
		t.Fatalf("oob %v, crossval %v", oob, cv)
	}
	o, c := cvFloat(t, oob[0][1]), cvFloat(t, cv[0][0])
	t.Logf("breast cancer: out-of-bag error %.4f, 5-fold cross-validated error %.4f", o, c)
	if math.Abs(o-c) > 0.02 {
		t.Errorf("out-of-bag error %.4f and cross-validated error %.4f differ by more than 0.02", o, c)
	}
	reg := trRows(t, db, "SELECT fold, metric FROM copse_crossval('bc', target := 'mean_radius', exclude := ['diagnosis'], folds := 3, trees := 10) WHERE fold = 1")
	if got := []string{reg[0][1], reg[1][1], reg[2][1]}; len(reg) != 3 || !slices.Equal(got, []string{"rmse", "mae", "r2"}) {
		t.Errorf("regression metrics %v, want rmse, mae, r2", reg)
	}
}

// TestCrossvalErrors: bad input names what is wrong and leaves the catalog as it was.
func TestCrossvalErrors(t *testing.T) {
	_, db := cvHost(t)
	trRows(t, db, "CALL copse_train('kept', 'iris', target := 'species', trees := 3)")
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"FROM copse_crossval('iris', target := 'species', folds := 1)", []string{"copse_crossval: folds 1", "≥ 2"}},
		{"FROM copse_crossval('iris', target := 'species', folds := 2.5)", []string{"folds 2.5"}},
		{"FROM copse_crossval('iris', target := 'species', folds := 151)", []string{"copse_crossval", "folds 151", "only 150 rows"}},
		{"FROM copse_crossval('iris')", []string{"copse_crossval: target := 'column' is required"}},
		{"FROM copse_crossval('iris', target := 'nope')", []string{"copse_crossval", "nope"}},
		{"FROM copse_crossval('iris', target := 'species', max_depth := -1)", []string{"copse_crossval", "max_depth -1"}},
		{"FROM copse_crossval('iris', target := 'species', method := 'magic')", []string{"copse_crossval", "method \"magic\""}},
		{"FROM copse_crossval('missing_table', target := 'species')", []string{"copse_crossval", "missing_table"}},
		{"FROM copse_crossval(NULL, target := 'species')", []string{"copse_crossval", "source is NULL"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
}
