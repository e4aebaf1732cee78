package udf

import (
	"slices"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// AdaBoost through SQL (Freund & Schapire 1997; SAMME, Zhu et al. 2009): copse_train's
// method := 'adaboost' with trees, max_depth and learning_rate reaches the engine and
// stores forest.Train's bytes; the scoring functions equal the engine's Predict bit for
// bit; options AdaBoost does not take, and numeric targets, are refused by name with the
// catalog left as it was.

func TestAdaBoostSQLMatchesEngine(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, "CREATE TABLE iris AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/iris.csv')")
	iris := trCSV(t, "iris.csv", "species")
	for _, tc := range []struct {
		opts string
		p    func(p *forest.Params)
	}{
		{"", nil},
		{", trees := 30, max_depth := 2, learning_rate := 0.5, seed := 4, threads := 1",
			func(p *forest.Params) { p.Trees, p.MaxDepth, p.LearningRate, p.Seed = 30, 2, 0.5, 4 }},
	} {
		row := bsTrain(t, db, "ira", "iris", "target := 'species', method := 'adaboost', exclude := ['id']"+tc.opts)
		if row["method"] != "adaboost" || row["task"] != "classification" || row["rows"] != "150" || row["oob_metric"] != "NULL" {
			t.Errorf("%q: summary %v", tc.opts, row)
		}
		p := forest.DefaultParams(forest.MethodAdaBoost)
		if tc.p != nil {
			tc.p(&p)
		}
		trSameModel(t, h, "ira", iris, p)
	}
	m, _ := trModel(t, h, "ira")
	if m.AdaBoost == nil || len(m.AdaBoost.Alpha) != len(m.Trees) {
		t.Fatalf("adaboost record %+v for %d trees", m.AdaBoost, len(m.Trees))
	}
	want := enginePredict(t, db, m, "SELECT * FROM iris ORDER BY id")
	for k, class := range m.Classes {
		sameBits(t, "copse_score "+class, queryFloats(t, db, "SELECT copse_score('ira', i, '"+class+"') FROM iris i ORDER BY id"), column(want, 3, k))
	}
	var labels []string
	for i := range 150 {
		labels = append(labels, m.Classes[forest.Class(want[3*i:3*i+3])])
	}
	if got := queryStrings(t, db, "SELECT copse_label('ira', i) FROM iris i ORDER BY id"); !slices.Equal(got, labels) {
		t.Error("copse_label differs from the engine's classes")
	}
	if got := queryStrings(t, db, "SELECT prediction FROM copse_predict('ira', 'iris') ORDER BY id"); !slices.Equal(got, labels) {
		t.Error("copse_predict's prediction differs from the engine's classes")
	}
	// α-weighted impurity importance is there; permutation importance and OOB are not.
	if n := queryFloats(t, db, "SELECT count(*) FROM copse_importance('ira')"); n[0] != 4 {
		t.Errorf("importance rows %v", n)
	}
	wantErr(t, db, "SELECT * FROM copse_oob('ira')", `"ira"`, "adaboost")
}

func TestAdaBoostSQLBadOptions(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE fr AS SELECT * FROM read_csv('../testdata/friedman1_train.csv')")
	trExec(t, db, "CREATE TABLE iris AS SELECT * FROM read_csv('../testdata/iris.csv')")
	trRows(t, db, "CALL copse_train('m', 'iris', target := 'species', trees := 2)")
	const ok = "'iris', target := 'species', method := 'adaboost', trees := 5"
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"CALL copse_train('m', " + ok + ", loss := 'logistic')", []string{"loss", "'adaboost'"}},
		{"CALL copse_train('m', " + ok + ", holdout_fraction := 0.2)", []string{"holdout_fraction", "'adaboost'"}},
		{"CALL copse_train('m', " + ok + ", patience := 3)", []string{"patience", "'adaboost'"}},
		{"CALL copse_train('m', " + ok + ", leaf_penalty := 1)", []string{"leaf_penalty", "'adaboost'"}},
		{"CALL copse_train('m', " + ok + ", row_fraction := 0.5)", []string{"row_fraction", "'adaboost'"}},
		{"CALL copse_train('m', " + ok + ", with_replacement := true)", []string{"with_replacement", "'adaboost'"}},
		{"CALL copse_train('m', " + ok + ", features_per_split := 2)", []string{"features_per_split", "'adaboost'"}},
		{"CALL copse_train('m', " + ok + ", learning_rate := 0)", []string{"learning_rate 0", "(0, 1]"}},
		{"CALL copse_train('m', " + ok + ", max_depth := -1)", []string{"max_depth -1"}},
		{"CALL copse_train('m', 'fr', target := 'y', method := 'adaboost')", []string{`"m"`, "'adaboost'", `target "y"`, "regression"}},
		{"CALL copse_train('m', 'fr', target := 'y', method := 'adaboost', task := 'regression')", []string{"adaboost", "classifies", "regression"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	// The catalog still holds the forest 'm' as it was: one version, method forest.
	if got := trRows(t, db, "SELECT method, version FROM copse_models() WHERE name = 'm'"); len(got) != 1 || got[0][0] != "forest" || got[0][1] != "1" {
		t.Errorf("catalog changed: %v", got)
	}
	if jobs := h.Jobs(); len(jobs) != 0 {
		t.Errorf("jobs left behind: %+v", jobs)
	}
}
