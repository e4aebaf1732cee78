package udf

import (
	"math"
	"slices"
	"strconv"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// The linear baseline through SQL: copse_train's method := 'linear' (with ridge := λ)
// stores forest.Train's bytes; copse_score, copse_label and copse_predict equal the
// engine's Predict bit for bit; copse_coefficients returns the model's terms; tree
// options and a bad ridge are refused by name with the catalog left as it was.

const (
	lnLongley = "read_csv(''../testdata/longley.csv'')"
	lnMtcars  = "read_csv(''../testdata/mtcars_am.csv'')"
)

func TestLinearSQLMatchesEngine(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	longley := bsRegressionCSV(t, "longley.csv", "employed")
	for _, ridge := range []float64{0, 2.5} {
		opts := "target := 'employed', method := 'linear'"
		p := forest.DefaultParams(forest.MethodLinear)
		if ridge > 0 {
			opts += ", ridge := " + strconv.FormatFloat(ridge, 'g', -1, 64)
			p.Ridge = ridge
		}
		row := bsTrain(t, db, "ll", lnLongley, opts)
		if row["method"] != "linear" || row["task"] != "regression" || row["rows"] != "16" || row["oob_metric"] != "NULL" {
			t.Errorf("ridge %v: summary %v", ridge, row)
		}
		trSameModel(t, h, "ll", longley, p)
	}
	bsTrain(t, db, "lg", lnMtcars, "target := 'am', method := 'linear'")
	trSameModel(t, h, "lg", trCSV(t, "mtcars_am.csv", "am"), forest.DefaultParams(forest.MethodLinear))
}

func TestLinearSQLScoring(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, "CREATE TABLE ll AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/longley.csv')")
	mustExec(t, db, "CREATE TABLE mt AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/mtcars_am.csv')")
	bsTrain(t, db, "lr", "ll", "target := 'employed', method := 'linear', exclude := ['id']")
	bsTrain(t, db, "lc", "mt", "target := 'am', method := 'linear', exclude := ['id']")

	m, _ := trModel(t, h, "lr")
	want := enginePredict(t, db, m, "SELECT * FROM ll ORDER BY id")
	sameBits(t, "copse_score", queryFloats(t, db, "SELECT copse_score('lr', l) FROM ll l ORDER BY id"), want)
	sameBits(t, "copse_predict", queryFloats(t, db, "SELECT prediction FROM copse_predict('lr', 'll') ORDER BY id"), want)

	m, _ = trModel(t, h, "lc")
	want = enginePredict(t, db, m, "SELECT * FROM mt ORDER BY id")
	sameBits(t, "copse_score manual", queryFloats(t, db, "SELECT copse_score('lc', m, 'manual') FROM mt m ORDER BY id"), column(want, 2, 1))
	var labels []string
	for i := range len(want) / 2 {
		labels = append(labels, m.Classes[forest.Class(want[2*i:2*i+2])])
	}
	if got := queryStrings(t, db, "SELECT copse_label('lc', m) FROM mt m ORDER BY id"); !slices.Equal(got, labels) {
		t.Error("copse_label differs from the engine's classes")
	}
	if got := queryStrings(t, db, "SELECT prediction FROM copse_predict('lc', 'mt') ORDER BY id"); !slices.Equal(got, labels) {
		t.Error("copse_predict's prediction differs from the engine's classes")
	}
}

// copse_coefficients returns the model's terms in order, NULL for what a ridge fit has
// no value for; a categorical feature's indicators and a missing indicator carry the
// documented names; copse_importance explains that a linear model has none.
func TestLinearSQLCoefficients(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, `CREATE TABLE mix AS SELECT i, CASE WHEN i % 5 = 0 THEN NULL ELSE (i % 7) - 3 END AS x,
		['east', 'north', 'south'][i % 3 + 1] AS region,
		1 + 2 * coalesce((i % 7) - 3, 0) + (i % 3) + 0.1 * ((i * 7) % 5) AS y FROM range(60) t(i)`)
	for _, opts := range []string{"", ", ridge := 1"} {
		bsTrain(t, db, "lm", "mix", "target := 'y', method := 'linear', exclude := ['i']"+opts)
		m, _ := trModel(t, h, "lm")
		rows := trRows(t, db, "SELECT term, estimate, std_error, z, p_value FROM copse_coefficients('lm')")
		var names []string
		for j, r := range rows {
			names = append(names, r[0])
			term := m.Linear.Terms[j]
			for k, v := range []float64{term.Estimate, term.StdError, term.Z, term.PValue} {
				got := r[k+1]
				if math.IsNaN(v) {
					if got != "NULL" {
						t.Errorf("%s column %d: %s, want NULL", term.Name, k+1, got)
					}
					continue
				}
				if f, err := strconv.ParseFloat(got, 64); err != nil || f != v {
					t.Errorf("%s column %d: %s, want %v", term.Name, k+1, got, v)
				}
			}
		}
		if want := []string{"(intercept)", "x", "x:missing", "region=north", "region=south"}; !slices.Equal(names, want) {
			t.Errorf("terms %q, want %q", names, want)
		}
	}
	wantErr(t, db, "FROM copse_importance('lm')", `"lm"`, "linear", "copse_coefficients")
	bsTrain(t, db, "fo", "mix", "target := 'y', trees := 3, exclude := ['i']")
	wantErr(t, db, "FROM copse_coefficients('fo')", `"fo"`, "forest", "'linear'")
}

func TestLinearSQLBadOptions(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE ll AS SELECT * FROM read_csv('../testdata/longley.csv')")
	trExec(t, db, "CREATE TABLE iris AS SELECT * FROM read_csv('../testdata/iris.csv')")
	trRows(t, db, "CALL copse_train('m', 'll', target := 'employed', trees := 2)")
	before := trCatalog(t, db)
	const ok = "'ll', target := 'employed', method := 'linear'"
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"CALL copse_train('m', " + ok + ", ridge := -1)", []string{"ridge -1"}},
		{"CALL copse_train('m', " + ok + ", trees := 5)", []string{"trees", "'linear'"}},
		{"CALL copse_train('m', " + ok + ", max_depth := 2)", []string{"max_depth", "'linear'"}},
		{"CALL copse_train('m', " + ok + ", min_leaf := 2)", []string{"min_leaf", "'linear'"}},
		{"CALL copse_train('m', " + ok + ", bins := 20)", []string{"bins", "'linear'"}},
		{"CALL copse_train('m', " + ok + ", impurity := 'gini')", []string{"impurity", "'linear'"}},
		{"CALL copse_train('m', " + ok + ", row_fraction := 0.5)", []string{"row_fraction", "'linear'"}},
		{"CALL copse_train('m', " + ok + ", learning_rate := 0.5)", []string{"learning_rate", "'linear'"}},
		{"CALL copse_train('m', " + ok + ", loss := 'squared')", []string{"loss", "'linear'"}},
		{"CALL copse_train('m', 'll', target := 'employed', ridge := 1)", []string{"ridge", "'forest'", "'linear'"}},
		{"CALL copse_train('m', 'iris', target := 'species', method := 'linear')", []string{`"m"`, "linear", "two classes", "3"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if got := trCatalog(t, db); got != before {
		t.Errorf("catalog changed:\n%s\nwant\n%s", got, before)
	}
	if jobs := h.Jobs(); len(jobs) != 0 {
		t.Errorf("jobs left behind: %+v", jobs)
	}
}
