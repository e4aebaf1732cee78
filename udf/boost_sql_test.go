package udf

import (
	"context"
	"database/sql"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// Gradient boosting through SQL: copse_train's boosting options reach the engine, the
// summary row carries the holdout loss, copse_curve the losses by round, and the scoring
// functions score boosted models as the engine does.

// Sources of the shared test data, as copse_train's source argument.
const (
	bsFriedman = "read_csv(''../testdata/friedman1_train.csv'')"
	bsCancer   = "read_csv(''../testdata/breast_cancer.csv'')"
)

// bsRegressionCSV reads a CSV file of the shared test data in Go, independently of
// DuckDB, with every column numeric and target the regression target.
func bsRegressionCSV(t testing.TB, file, target string) *forest.Dataset {
	t.Helper()
	return bsRegressionCSVAt(t, filepath.Join("..", "testdata", file), target)
}

// bsRegressionCSVAt is bsRegressionCSV on a file at any path.
func bsRegressionCSVAt(t testing.TB, file, target string) *forest.Dataset {
	t.Helper()
	return csvDataset(t, file, target, false)
}

// bsTrain trains from SQL and returns copse_train's row as text (NULL as "NULL"), by
// column name.
func bsTrain(t testing.TB, db *sql.DB, name, source, opts string) map[string]string {
	t.Helper()
	q := "SELECT * FROM copse_train('" + name + "', '" + source + "', " + opts + ")"
	got := trRows(t, db, q)
	if len(got) != 1 || len(got[0]) != len(trainColumns) {
		t.Fatalf("%s: %v", q, got)
	}
	out := map[string]string{}
	for i, c := range trainColumns {
		out[c.Name] = got[0][i]
	}
	return out
}

// The boosting options reach the engine: the model trained from SQL on a CSV that DuckDB
// reads encodes to the very bytes of forest.Train's with the same Params on the file read
// in Go.
func TestBoostSQLMatchesEngine(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	fr := bsRegressionCSV(t, "friedman1_train.csv", "y")
	for _, tc := range []struct {
		opts string
		p    func(p *forest.Params)
	}{
		{"trees := 40, seed := 7", func(p *forest.Params) { p.Trees, p.Seed = 40, 7 }},
		{"loss := 'squared', trees := 30, max_depth := 3, learning_rate := 0.2, leaf_penalty := 1.5, min_leaf := 5, " +
			"row_fraction := 0.8, features_per_split := 0.5, bins := 64, seed := 11, threads := 1",
			func(p *forest.Params) {
				p.Loss, p.Trees, p.MaxDepth, p.LearningRate, p.LeafPenalty, p.MinLeaf = forest.LossSquared, 30, 3, 0.2, 1.5, 5
				p.RowFraction, p.FeaturesPerSplit, p.Bins, p.Seed = 0.8, 0.5, 64, 11
			}},
		{"trees := 60, learning_rate := 0.3, holdout_fraction := 0.25, patience := 4, seed := 3",
			func(p *forest.Params) {
				p.Trees, p.LearningRate, p.HoldoutFraction, p.Patience, p.Seed = 60, 0.3, 0.25, 4, 3
			}},
	} {
		row := bsTrain(t, db, "fr", bsFriedman, "target := 'y', method := 'boosting', "+tc.opts)
		if row["method"] != "boosting" || row["task"] != "regression" || row["rows"] != "2000" || row["features"] != "10" {
			t.Errorf("%s: summary %v", tc.opts, row)
		}
		p := forest.DefaultParams(forest.MethodBoosting)
		tc.p(&p)
		trSameModel(t, h, "fr", fr, p)
	}

	bc := trCSV(t, "breast_cancer.csv", "diagnosis")
	row := bsTrain(t, db, "bcb", bsCancer, "target := 'diagnosis', method := 'BOOSTING', loss := 'logistic', trees := 25, max_depth := 4, seed := 2")
	if row["task"] != "classification" || row["oob_metric"] != "NULL" || row["oob_value"] != "NULL" || row["trees"] != "25" {
		t.Errorf("breast cancer: summary %v", row)
	}
	p := forest.DefaultParams(forest.MethodBoosting)
	p.Loss, p.Trees, p.MaxDepth, p.Seed = forest.LossLogistic, 25, 4, 2
	trSameModel(t, h, "bcb", bc, p)
	if m, _ := trModel(t, h, "bcb"); m.Boost == nil || m.Boost.Loss != forest.LossLogistic || !slices.Equal(m.Classes, []string{"benign", "malignant"}) {
		t.Errorf("breast cancer: boost %+v, classes %q", m.Boost, m.Classes)
	}
}

// copse_score, copse_label and copse_predict score boosted models bit for bit as the
// engine's Predict does.
func TestBoostSQLScoring(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, "CREATE TABLE bc AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/breast_cancer.csv')")
	mustExec(t, db, "CREATE TABLE fr_test AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/friedman1_test.csv')")
	bsTrain(t, db, "bcb", bsCancer, "target := 'diagnosis', method := 'boosting', trees := 40, learning_rate := 0.2, seed := 5")
	bsTrain(t, db, "frb", bsFriedman, "target := 'y', method := 'boosting', trees := 40, holdout_fraction := 0.2, seed := 5")

	m, _ := trModel(t, h, "bcb")
	want := enginePredict(t, db, m, "SELECT * FROM bc ORDER BY id")
	if len(want) != 2*569 {
		t.Fatalf("engine: %d numbers", len(want))
	}
	sameBits(t, "copse_score", queryFloats(t, db, "SELECT copse_score('bcb', b) FROM bc b ORDER BY id"), column(want, 2, 1))
	sameBits(t, "copse_score benign", queryFloats(t, db, "SELECT copse_score('bcb', b, 'benign') FROM bc b ORDER BY id"), column(want, 2, 0))
	sameBits(t, "copse_predict", queryFloats(t, db, "SELECT probability FROM copse_predict('bcb', 'bc') ORDER BY id"), column(want, 2, 1))
	// Each row scored alone equals the batch.
	row := make([]float64, len(m.Features))
	cols := engineCols(t, db, m, "SELECT * FROM bc ORDER BY id")
	for i := range 569 {
		for f := range cols {
			row[f] = cols[f][i]
		}
		got := m.PredictRow(row, make([]float64, 2))
		if math.Float64bits(got[1]) != math.Float64bits(want[2*i+1]) {
			t.Fatalf("row %d: PredictRow %v, Predict %v", i, got[1], want[2*i+1])
		}
	}
	var labels []string
	for i := range 569 {
		labels = append(labels, m.Classes[forest.Class(want[2*i:2*i+2])])
	}
	if got := queryStrings(t, db, "SELECT copse_label('bcb', b) FROM bc b ORDER BY id"); !slices.Equal(got, labels) {
		t.Errorf("copse_label differs from the engine's classes")
	}
	if got := queryStrings(t, db, "SELECT prediction FROM copse_predict('bcb', 'bc') ORDER BY id"); !slices.Equal(got, labels) {
		t.Errorf("copse_predict's prediction differs from the engine's classes")
	}
	// The boosted model separates the classes on its own training rows.
	wrong := 0
	for i, l := range queryStrings(t, db, "SELECT diagnosis FROM bc ORDER BY id") {
		if l != labels[i] {
			wrong++
		}
	}
	if wrong > 569/20 {
		t.Errorf("%d of 569 training rows misclassified", wrong)
	}

	r, _ := trModel(t, h, "frb")
	want = enginePredict(t, db, r, "SELECT * FROM fr_test ORDER BY id")
	sameBits(t, "copse_score regression", queryFloats(t, db, "SELECT copse_score('frb', x) FROM fr_test x ORDER BY id"), want)
	sameBits(t, "copse_predict regression", queryFloats(t, db, "SELECT prediction FROM copse_predict('frb', 'fr_test') ORDER BY id"), want)
	wantErr(t, db, "SELECT copse_label('frb', x) FROM fr_test x", `"frb"`, "regression")
}

// copse_curve is the boosting record: training and holdout loss by round, rounds past the
// kept best one included; early stopping keeps the best holdout round, and the summary
// row and copse_models report its holdout loss.
func TestBoostSQLCurveAndEarlyStopping(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	const trees, patience = 300, 5
	row := bsTrain(t, db, "es", bsFriedman, "target := 'y', method := 'boosting', trees := 300, learning_rate := 0.5, "+
		"holdout_fraction := 0.2, patience := 5, seed := 9")
	m, e := trModel(t, h, "es")
	b := m.Boost
	if b == nil || b.HoldoutLoss == nil {
		t.Fatalf("boost %+v", b)
	}
	if b.BestRound < 1 || b.BestRound > b.Rounds || b.Rounds > trees || len(m.Trees) != b.BestRound {
		t.Fatalf("best round %d, rounds %d, trees %d", b.BestRound, b.Rounds, len(m.Trees))
	}
	if b.Rounds == trees || b.Rounds != b.BestRound+patience {
		t.Errorf("rounds %d, best %d: want early stopping %d rounds after the best", b.Rounds, b.BestRound, patience)
	}
	best := b.HoldoutLoss[b.BestRound-1]
	for r, l := range b.HoldoutLoss {
		if l < best || (l == best && r < b.BestRound-1) {
			t.Errorf("round %d holdout loss %v beats the kept round %d's %v", r+1, l, b.BestRound, best)
		}
	}
	if row["oob_metric"] != holdoutMetric[forest.LossSquared] || row["trees"] != strconv.Itoa(b.BestRound) {
		t.Errorf("summary %v: want %s over %d trees", row, holdoutMetric[forest.LossSquared], b.BestRound)
	}
	if v, err := strconv.ParseFloat(row["oob_value"], 64); err != nil || v != best {
		t.Errorf("summary oob_value %q, want %v", row["oob_value"], best)
	}
	sameBits(t, "copse_models oob_value", queryFloats(t, db, "SELECT oob_value FROM copse_models() WHERE name = 'es'"), []float64{best})
	if e.OOBMetric != holdoutMetric[forest.LossSquared] {
		t.Errorf("catalog metric %q", e.OOBMetric)
	}

	rounds := queryFloats(t, db, "SELECT DISTINCT trees FROM copse_curve('es') ORDER BY trees")
	wantRounds := make([]float64, b.Rounds)
	for r := range wantRounds {
		wantRounds[r] = float64(r + 1)
	}
	sameBits(t, "curve rounds", rounds, wantRounds)
	sameBits(t, "train_loss", queryFloats(t, db, "SELECT value FROM copse_curve('es') WHERE metric = 'train_loss' ORDER BY trees"), b.TrainLoss)
	sameBits(t, "holdout_loss", queryFloats(t, db, "SELECT value FROM copse_curve('es') WHERE metric = 'holdout_loss' ORDER BY trees"), b.HoldoutLoss)
	if n := queryFloats(t, db, "SELECT count(*) FROM copse_curve('es')"); n[0] != float64(2*b.Rounds) {
		t.Errorf("curve: %v rows, want %d", n, 2*b.Rounds)
	}
	// The training loss falls round after round on squared loss with full rows.
	if b.TrainLoss[len(b.TrainLoss)-1] >= b.TrainLoss[0] {
		t.Errorf("train loss %v … %v", b.TrainLoss[0], b.TrainLoss[len(b.TrainLoss)-1])
	}

	// Logistic, no holdout: only the training loss, every round kept, no summary metric.
	row = bsTrain(t, db, "lg", bsCancer, "target := 'diagnosis', method := 'boosting', trees := 20, seed := 4")
	if row["oob_metric"] != "NULL" || row["oob_value"] != "NULL" {
		t.Errorf("no holdout: summary %v", row)
	}
	lg, _ := trModel(t, h, "lg")
	if lg.Boost.Rounds != 20 || lg.Boost.BestRound != 20 || lg.Boost.HoldoutLoss != nil {
		t.Errorf("no holdout: %+v", lg.Boost)
	}
	if got := queryStrings(t, db, "SELECT DISTINCT metric FROM copse_curve('lg')"); !slices.Equal(got, []string{curveTrainLoss}) {
		t.Errorf("no holdout: metrics %q", got)
	}
	sameBits(t, "logistic train_loss", queryFloats(t, db, "SELECT value FROM copse_curve('lg') ORDER BY trees"), lg.Boost.TrainLoss)

	// Logistic with a holdout: log loss.
	row = bsTrain(t, db, "lgh", bsCancer, "target := 'diagnosis', method := 'boosting', trees := 30, holdout_fraction := 0.2, seed := 4")
	lgh, _ := trModel(t, h, "lgh")
	if row["oob_metric"] != holdoutMetric[forest.LossLogistic] {
		t.Errorf("logistic holdout: summary %v", row)
	}
	sameBits(t, "logistic holdout", queryFloats(t, db, "SELECT oob_value FROM copse_train('lgh', '"+bsCancer+"', target := 'diagnosis', "+
		"method := 'boosting', trees := 30, holdout_fraction := 0.2, seed := 4)"), []float64{lgh.Boost.HoldoutLoss[lgh.Boost.BestRound-1]})
	sameBits(t, "logistic holdout_loss", queryFloats(t, db, "SELECT value FROM copse_curve('lgh') WHERE metric = 'holdout_loss' ORDER BY trees"),
		lgh.Boost.HoldoutLoss)
}

// copse_importance gives a boosted model's impurity importance; permutation importance
// and copse_oob, which need out-of-bag rows, are refused with the reason.
func TestBoostSQLRelations(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	bsTrain(t, db, "fr", bsFriedman, "target := 'y', method := 'boosting', trees := 20, seed := 1")
	m, _ := trModel(t, h, "fr")
	got := map[string]float64{}
	rows := trRows(t, db, "SELECT feature, importance FROM copse_importance('fr')")
	if len(rows) != len(m.Features) {
		t.Fatalf("importance: %d rows", len(rows))
	}
	for _, r := range rows {
		got[r[0]], _ = strconv.ParseFloat(r[1], 64)
	}
	for f, feat := range m.Features {
		if got[feat.Name] != m.Importance.Impurity[f] {
			t.Errorf("importance of %s: %v, want %v", feat.Name, got[feat.Name], m.Importance.Impurity[f])
		}
	}
	// Friedman #1: x1…x5 drive y; x6…x10 are noise.
	top := trRows(t, db, "SELECT feature FROM copse_importance('fr', method := 'impurity') WHERE rank <= 5 ORDER BY feature")
	var names []string
	for _, r := range top {
		names = append(names, r[0])
	}
	if !slices.Equal(names, []string{"x1", "x2", "x3", "x4", "x5"}) {
		t.Errorf("top 5 features %q", names)
	}
	wantErr(t, db, "FROM copse_importance('fr', method := 'permutation')", `"fr"`, "no permutation importance", "boosting", "'impurity'")
	wantErr(t, db, "FROM copse_oob('fr')", "copse_oob", `"fr"`, "boosting", "out-of-bag", "holdout_fraction")
	// Without a holdout the curve still has the training loss.
	if n := queryFloats(t, db, "SELECT count(*) FROM copse_curve('fr')"); n[0] != 20 {
		t.Errorf("curve: %v rows", n)
	}
}

// Every boosting option's bad value, and every option the method does not take, is an
// error naming the option, before or during the training; the catalog is left as it was.
func TestBoostSQLBadOptions(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE fr AS SELECT * FROM read_csv('../testdata/friedman1_train.csv')")
	trExec(t, db, "CREATE TABLE bc AS SELECT * FROM read_csv('../testdata/breast_cancer.csv')")
	trExec(t, db, "CREATE TABLE iris AS SELECT * FROM read_csv('../testdata/iris.csv')")
	trRows(t, db, "CALL copse_train('kept', 'fr', target := 'y', method := 'boosting', trees := 3)")
	trRows(t, db, "CALL copse_train('kept', 'fr', target := 'y', trees := 2)")
	const ok = "'fr', target := 'y', method := 'boosting', trees := 5"
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"CALL copse_train('m', " + ok + ", loss := 'hinge')", []string{`loss "hinge"`, "'squared'", "'logistic'"}},
		{"CALL copse_train('m', " + ok + ", loss := '')", []string{"loss is empty"}},
		{"CALL copse_train('m', " + ok + ", loss := 'logistic')", []string{"loss 'logistic'", `target "y"`, "regression"}},
		{"CALL copse_train('m', 'bc', target := 'diagnosis', method := 'boosting', loss := 'squared')", []string{"loss 'squared'", `target "diagnosis"`, "classification"}},
		{"CALL copse_train('m', " + ok + ", task := 'classification', loss := 'squared')", []string{`loss "squared"`, "classification"}},
		{"CALL copse_train('m', " + ok + ", learning_rate := 0)", []string{"learning_rate 0", "(0, 1]"}},
		{"CALL copse_train('m', " + ok + ", learning_rate := 1.5)", []string{"learning_rate 1.5", "(0, 1]"}},
		{"CALL copse_train('m', " + ok + ", learning_rate := -0.1)", []string{"learning_rate -0.1"}},
		{"CALL copse_train('m', " + ok + ", learning_rate := 'nan'::DOUBLE)", []string{"learning_rate NaN", "finite"}},
		{"CALL copse_train('m', " + ok + ", learning_rate := 'fast')", []string{"fast"}},
		{"CALL copse_train('m', " + ok + ", leaf_penalty := -1)", []string{"leaf_penalty -1", "≥ 0"}},
		{"CALL copse_train('m', " + ok + ", leaf_penalty := 'inf'::DOUBLE)", []string{"leaf_penalty +Inf", "finite"}},
		{"CALL copse_train('m', " + ok + ", holdout_fraction := 1)", []string{"holdout_fraction 1", "[0, 1)"}},
		{"CALL copse_train('m', " + ok + ", holdout_fraction := -0.2)", []string{"holdout_fraction -0.2", "[0, 1)"}},
		{"CALL copse_train('m', " + ok + ", holdout_fraction := 0.0001)", []string{"holdout_fraction 0.0001", "no rows"}},
		{"CALL copse_train('m', " + ok + ", patience := 0)", []string{"patience 0", "at least 1"}},
		{"CALL copse_train('m', " + ok + ", patience := 2.5)", []string{"patience 2.5", "whole number"}},
		{"CALL copse_train('m', " + ok + ", with_replacement := true)", []string{"with_replacement", "'boosting'"}},
		{"CALL copse_train('m', " + ok + ", with_replacement := false)", []string{"with_replacement", "'boosting'"}},
		{"CALL copse_train('m', 'bc', target := 'diagnosis', method := 'boosting', impurity := 'gini')", []string{"impurity", "'boosting'"}},
		{"CALL copse_train('m', 'iris', target := 'species', method := 'boosting', loss := 'logistic')", []string{`"m"`, "logistic", "3 classes", "multinomial"}},
		{"CALL copse_train('m', 'bc', target := 'diagnosis', method := 'boosting', loss := 'multinomial')", []string{`"m"`, `loss "multinomial"`, "2 classes", "logistic"}},
		{"CALL copse_train('m', " + ok + ", loss := 'multinomial')", []string{"loss 'multinomial'", `target "y"`, "regression"}},
		{"CALL copse_train('m', 'fr', target := 'y', loss := 'squared')", []string{"loss", "'forest'", "'boosting'"}},
		{"CALL copse_train('m', 'fr', target := 'y', method := 'bagging', learning_rate := 0.1)", []string{"learning_rate", "'bagging'", "'boosting'"}},
		{"CALL copse_train('m', 'fr', target := 'y', method := 'tree', leaf_penalty := 1)", []string{"leaf_penalty", "'tree'", "'boosting'"}},
		{"CALL copse_train('m', 'fr', target := 'y', holdout_fraction := 0.2)", []string{"holdout_fraction", "'forest'", "'boosting'"}},
		{"CALL copse_train('m', 'fr', target := 'y', method := 'forest', patience := 3)", []string{"patience", "'forest'", "'boosting'"}},
		{"CALL copse_train('m', 'fr', target := 'y', method := 'boost')", []string{`method "boost"`, "'boosting'"}},
		{"CALL copse_train('m', " + ok + ", leaf_limit := 1)", []string{"leaf_limit 1", "2 or more"}},
		{"CALL copse_train('m', " + ok + ", leaf_limit := 3.5)", []string{"leaf_limit 3.5", "whole number"}},
		{"CALL copse_train('m', 'fr', target := 'y', leaf_limit := 8)", []string{"leaf_limit", "'forest'", "'boosting'"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if got := trRows(t, db, "SELECT count(*) FROM copse_models() WHERE name = 'm'"); got[0][0] != "0" {
		t.Errorf("model m saved: %v", got)
	}
	if jobs := h.Jobs(); len(jobs) != 0 {
		t.Errorf("jobs left behind: %+v", jobs)
	}
	// A NULL boosting option means "not given", as for every option.
	trRows(t, db, "CALL copse_train('nulls', "+ok+", loss := NULL, learning_rate := NULL, patience := NULL)")
	if got := trRows(t, db, "SELECT method, trees FROM copse_models() WHERE name = 'nulls'"); len(got) != 1 || !strings.EqualFold(got[0][0], "boosting") {
		t.Errorf("nulls: %v", got)
	}
}

// bsCountsCSV writes simulated counts with the log-linear rate log μ = 0.3 + x₁ − 0.5x₂
// to a CSV file and returns its path.
func bsCountsCSV(t testing.TB) string {
	t.Helper()
	rng := rand.New(rand.NewPCG(21, 22))
	var b strings.Builder
	b.WriteString("x1,x2,y\n")
	for range 800 {
		x1, x2 := rng.Float64(), rng.Float64()
		l, k, p := math.Exp(-math.Exp(0.3+x1-0.5*x2)), 0, 1.0
		for p *= rng.Float64(); p > l; p *= rng.Float64() {
			k++
		}
		b.WriteString(strconv.FormatFloat(x1, 'g', -1, 64) + "," + strconv.FormatFloat(x2, 'g', -1, 64) + "," + strconv.Itoa(k) + "\n")
	}
	path := filepath.Join(t.TempDir(), "counts.csv")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// The losses absolute, huber, quantile and poisson reach the engine: the model trained
// from SQL encodes to forest.Train's bytes with the same Params, the summary names the
// loss's holdout metric, and copse_score and copse_predict equal the engine's Predict bit
// for bit (for poisson, the mean count e^F).
func TestBoostSQLLosses(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	fr := bsRegressionCSV(t, "friedman1_train.csv", "y")
	mustExec(t, db, "CREATE TABLE fr_test AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/friedman1_test.csv')")
	for _, tc := range []struct {
		name, opts, metric string
		p                  func(p *forest.Params)
	}{
		{"abs", "loss := 'absolute', trees := 20, max_depth := 3, holdout_fraction := 0.2, seed := 3", "holdout_mae",
			func(p *forest.Params) {
				p.Loss, p.Trees, p.MaxDepth, p.HoldoutFraction, p.Seed = forest.LossAbsolute, 20, 3, 0.2, 3
			}},
		{"hub", "loss := 'HUBER', trees := 20, row_fraction := 0.7, holdout_fraction := 0.2, seed := 4", "holdout_huber",
			func(p *forest.Params) {
				p.Loss, p.Trees, p.RowFraction, p.HoldoutFraction, p.Seed = forest.LossHuber, 20, 0.7, 0.2, 4
			}},
		{"q75", "loss := 'quantile', quantile := 0.75, trees := 20, holdout_fraction := 0.2", "holdout_pinball",
			func(p *forest.Params) {
				p.Loss, p.Quantile, p.Trees, p.HoldoutFraction = forest.LossQuantile, 0.75, 20, 0.2
			}},
		{"q90", "loss := 'quantile', trees := 10", "NULL",
			func(p *forest.Params) { p.Loss, p.Quantile, p.Trees = forest.LossQuantile, 0.9, 10 }},
	} {
		row := bsTrain(t, db, tc.name, bsFriedman, "target := 'y', method := 'boosting', "+tc.opts)
		if row["task"] != "regression" || row["oob_metric"] != tc.metric {
			t.Errorf("%s: summary %v, want metric %s", tc.name, row, tc.metric)
		}
		p := forest.DefaultParams(forest.MethodBoosting)
		tc.p(&p)
		trSameModel(t, h, tc.name, fr, p)
		m, _ := trModel(t, h, tc.name)
		want := enginePredict(t, db, m, "SELECT * FROM fr_test ORDER BY id")
		sameBits(t, tc.name+" copse_score", queryFloats(t, db, "SELECT copse_score('"+tc.name+"', x) FROM fr_test x ORDER BY id"), want)
	}

	path := bsCountsCSV(t)
	mustExec(t, db, "CREATE TABLE counts AS SELECT row_number() OVER () AS id, * FROM read_csv('"+path+"')")
	row := bsTrain(t, db, "pois", "counts", "target := 'y', method := 'boosting', loss := 'poisson', exclude := ['id'], "+
		"trees := 30, max_depth := 3, holdout_fraction := 0.25, seed := 6")
	if row["oob_metric"] != "holdout_poisson_deviance" {
		t.Errorf("poisson: summary %v", row)
	}
	p := forest.DefaultParams(forest.MethodBoosting)
	p.Loss, p.Trees, p.MaxDepth, p.HoldoutFraction, p.Seed = forest.LossPoisson, 30, 3, 0.25, 6
	trSameModel(t, h, "pois", bsRegressionCSVAt(t, path, "y"), p)
	m, _ := trModel(t, h, "pois")
	want := enginePredict(t, db, m, "SELECT * FROM counts ORDER BY id")
	sameBits(t, "poisson copse_score", queryFloats(t, db, "SELECT copse_score('pois', c) FROM counts c ORDER BY id"), want)
	sameBits(t, "poisson copse_predict", queryFloats(t, db, "SELECT prediction FROM copse_predict('pois', 'counts') ORDER BY id"), want)
	for i, v := range want {
		if !(v > 0) {
			t.Fatalf("row %d: mean count %v", i, v)
		}
	}
}

// The new losses' bad values name the option (or the target) and leave the catalog as
// it was.
func TestBoostSQLLossBadOptions(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE fr AS SELECT * FROM read_csv('../testdata/friedman1_train.csv')")
	trExec(t, db, "CREATE TABLE neg AS SELECT x1, x2, y - 100 AS y FROM fr")
	trExec(t, db, "CREATE TABLE bc AS SELECT * FROM read_csv('../testdata/breast_cancer.csv')")
	const ok = "'fr', target := 'y', method := 'boosting', trees := 5"
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"CALL copse_train('m', " + ok + ", loss := 'quantile', quantile := 1)", []string{"quantile 1", "(0, 1)"}},
		{"CALL copse_train('m', " + ok + ", loss := 'quantile', quantile := 0)", []string{"quantile 0", "(0, 1)"}},
		{"CALL copse_train('m', " + ok + ", loss := 'quantile', quantile := -0.5)", []string{"quantile -0.5", "(0, 1)"}},
		{"CALL copse_train('m', " + ok + ", loss := 'quantile', quantile := 'nan'::DOUBLE)", []string{"quantile NaN", "finite"}},
		{"CALL copse_train('m', " + ok + ", quantile := 0.5)", []string{"quantile", "loss := 'quantile'"}},
		{"CALL copse_train('m', " + ok + ", loss := 'absolute', quantile := 0.5)", []string{"quantile", "loss := 'quantile'"}},
		{"CALL copse_train('m', 'fr', target := 'y', quantile := 0.5)", []string{"quantile", "'forest'", "'boosting'"}},
		{"CALL copse_train('m', 'neg', target := 'y', method := 'boosting', loss := 'poisson')", []string{`"m"`, `loss "poisson"`, `target "y"`, "≥ 0"}},
		{"CALL copse_train('m', 'bc', target := 'diagnosis', method := 'boosting', loss := 'absolute')", []string{"loss 'absolute'", `target "diagnosis"`, "classification"}},
		{"CALL copse_train('m', 'bc', target := 'diagnosis', method := 'boosting', loss := 'poisson')", []string{"loss 'poisson'", `target "diagnosis"`}},
		{"CALL copse_train('m', " + ok + ", loss := 'gamma')", []string{`loss "gamma"`, "'absolute'", "'huber'", "'quantile'", "'poisson'"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if got := trRows(t, db, "SELECT count(*) FROM copse_models() WHERE name = 'm'"); got[0][0] != "0" {
		t.Errorf("model m saved: %v", got)
	}
	if jobs := h.Jobs(); len(jobs) != 0 {
		t.Errorf("jobs left behind: %+v", jobs)
	}
}

// bsExposureCSV writes counts drawn with mean years·exp(0.2 + x₁ − 0.5x₂), years in
// [0.5, 3], to a CSV file; it returns the path and the columns as written.
func bsExposureCSV(t testing.TB) (path string, x1, x2, years, y []float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(23, 24))
	var b strings.Builder
	b.WriteString("x1,x2,years,y\n")
	for range 800 {
		a, c, e := rng.Float64(), rng.Float64(), 0.5+2.5*rng.Float64()
		l, k, p := math.Exp(-e*math.Exp(0.2+a-0.5*c)), 0, 1.0
		for p *= rng.Float64(); p > l; p *= rng.Float64() {
			k++
		}
		x1, x2, years, y = append(x1, a), append(x2, c), append(years, e), append(y, float64(k))
		for _, v := range []float64{a, c, e} {
			b.WriteString(strconv.FormatFloat(v, 'g', -1, 64) + ",")
		}
		b.WriteString(strconv.Itoa(k) + "\n")
	}
	path = filepath.Join(t.TempDir(), "exposure.csv")
	if err := os.WriteFile(path, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path, x1, x2, years, y
}

// exposure := column is the Poisson offset: not a feature, stored in the model by name,
// and read back from the scored row, whose prediction is the engine's rate times the
// row's exposure; a NULL exposure scores NULL. Bad exposures name the option.
func TestBoostSQLExposure(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	path, x1, x2, years, y := bsExposureCSV(t)
	mustExec(t, db, "CREATE TABLE claims AS SELECT row_number() OVER () AS id, * FROM read_csv('"+path+"')")
	row := bsTrain(t, db, "freq", "claims", "target := 'y', method := 'boosting', loss := 'poisson', exposure := 'Years', "+
		"exclude := ['id'], trees := 30, max_depth := 3, seed := 2")
	if row["features"] != "2" {
		t.Errorf("summary %v: want 2 features (the exposure is not one)", row)
	}
	d := forest.NewDataset(len(y))
	for _, err := range []error{d.AddNumeric("x1", x1), d.AddNumeric("x2", x2), d.SetRegressionTarget("y", y), d.SetExposure("years", years)} {
		if err != nil {
			t.Fatal(err)
		}
	}
	p := forest.DefaultParams(forest.MethodBoosting)
	p.Loss, p.Trees, p.MaxDepth, p.Seed = forest.LossPoisson, 30, 3, 2
	trSameModel(t, h, "freq", d, p)
	m, _ := trModel(t, h, "freq")
	if m.Params.Exposure != "years" {
		t.Fatalf("exposure %q", m.Params.Exposure)
	}
	want := enginePredict(t, db, m, "SELECT * FROM claims ORDER BY id")
	for i := range want {
		want[i] *= years[i]
	}
	sameBits(t, "copse_score with exposure", queryFloats(t, db, "SELECT copse_score('freq', c) FROM claims c ORDER BY id"), want)
	sameBits(t, "copse_predict with exposure", queryFloats(t, db, "SELECT prediction FROM copse_predict('freq', 'claims') ORDER BY id"), want)
	// The exposure scales the prediction: twice the years, twice the mean count.
	twice := queryFloats(t, db, "SELECT copse_score('freq', {'x1': x1, 'x2': x2, 'YEARS': 2 * years}) FROM claims ORDER BY id")
	for i := range twice {
		if math.Abs(twice[i]-2*want[i]) > 1e-12*want[i] {
			t.Fatalf("row %d: %v with twice the exposure, %v with it", i, twice[i], want[i])
		}
	}
	if n := queryFloats(t, db, "SELECT count(*) FROM claims c WHERE copse_score('freq', {'x1': x1, 'x2': x2, 'years': CASE WHEN id % 2 = 0 THEN NULL ELSE years END}) IS NULL"); n[0] != 400 {
		t.Errorf("NULL exposure: %v NULL scores, want 400", n)
	}
	wantErr(t, db, "SELECT copse_score('freq', {'x1': x1, 'x2': x2}) FROM claims", `"freq"`, `exposure "years"`, "lacks")
	wantErr(t, db, "SELECT copse_score('freq', {'x1': x1, 'x2': x2, 'years': 'a'}) FROM claims", `"freq"`, `exposure "years"`)
	wantErr(t, db, "SELECT copse_score('freq', {'x1': x1, 'x2': x2, 'years': years - 3}) FROM claims", `"freq"`, `exposure "years"`, "above 0")

	trExec(t, db, "CREATE TABLE bad AS SELECT x1, x2, y, CASE WHEN id = 5 THEN 0 ELSE years END AS years, "+
		"CASE WHEN id = 6 THEN NULL ELSE years END AS yn, 'a' AS txt FROM claims")
	const ok = "'bad', target := 'y', method := 'boosting', trees := 3"
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"CALL copse_train('m', " + ok + ", loss := 'poisson', exposure := 'years')", []string{`exposure "years"`, "is 0 in row 5", "above 0"}},
		{"CALL copse_train('m', " + ok + ", loss := 'poisson', exposure := 'yn', exclude := ['years'])", []string{`exposure "yn"`, "NULL in row 6"}},
		{"CALL copse_train('m', " + ok + ", loss := 'poisson', exposure := 'txt')", []string{`exposure "txt"`, "numeric"}},
		{"CALL copse_train('m', " + ok + ", loss := 'poisson', exposure := 'nope')", []string{`exposure "nope"`, "no such column"}},
		{"CALL copse_train('m', " + ok + ", loss := 'poisson', exposure := 'y')", []string{`exposure "y"`, "target"}},
		{"CALL copse_train('m', " + ok + ", exposure := 'years')", []string{"exposure", "loss := 'poisson'"}},
		{"CALL copse_train('m', " + ok + ", loss := 'squared', exposure := 'years')", []string{"exposure", "loss := 'poisson'"}},
		{"CALL copse_train('m', 'bad', target := 'y', exposure := 'years')", []string{"exposure", "'forest'", "'boosting'"}},
		{"CALL copse_train('m', " + ok + ", loss := 'poisson', exposure := '')", []string{"exposure is empty"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if got := trRows(t, db, "SELECT count(*) FROM copse_models() WHERE name = 'm'"); got[0][0] != "0" {
		t.Errorf("model m saved: %v", got)
	}
}

// Multinomial boosting through SQL: a three-class target takes loss 'multinomial' by
// default; the model encodes to forest.Train's bytes, and copse_score (per class),
// copse_label and copse_predict equal the engine's Predict.
func TestBoostSQLMultinomial(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, "CREATE TABLE iris AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/iris.csv')")
	row := bsTrain(t, db, "irb", "iris", "target := 'species', method := 'boosting', exclude := ['id'], trees := 20, max_depth := 3, "+
		"holdout_fraction := 0.2, seed := 8")
	if row["task"] != "classification" || row["oob_metric"] != "holdout_log_loss" {
		t.Errorf("summary %v", row)
	}
	p := forest.DefaultParams(forest.MethodBoosting)
	p.Trees, p.MaxDepth, p.HoldoutFraction, p.Seed = 20, 3, 0.2, 8
	trSameModel(t, h, "irb", trCSV(t, "iris.csv", "species"), p)
	m, _ := trModel(t, h, "irb")
	if m.Boost.Loss != forest.LossMultinomial || len(m.Trees) != 3*m.Boost.BestRound {
		t.Fatalf("loss %q, %d trees, best round %d", m.Boost.Loss, len(m.Trees), m.Boost.BestRound)
	}
	bsTrain(t, db, "irm", "iris", "target := 'species', method := 'boosting', loss := 'multinomial', exclude := ['id'], trees := 20, max_depth := 3, "+
		"holdout_fraction := 0.2, seed := 8")
	m2, _ := trModel(t, h, "irm")
	if a, b := encodeModel(t, m), encodeModel(t, m2); !slices.Equal(a, b) {
		t.Error("loss := 'multinomial' differs from the default for three classes")
	}
	want := enginePredict(t, db, m, "SELECT * FROM iris ORDER BY id")
	for k, class := range m.Classes {
		sameBits(t, "copse_score "+class, queryFloats(t, db, "SELECT copse_score('irb', i, '"+class+"') FROM iris i ORDER BY id"), column(want, 3, k))
	}
	var labels []string
	for i := range 150 {
		labels = append(labels, m.Classes[forest.Class(want[3*i:3*i+3])])
	}
	if got := queryStrings(t, db, "SELECT copse_label('irb', i) FROM iris i ORDER BY id"); !slices.Equal(got, labels) {
		t.Error("copse_label differs from the engine's classes")
	}
	if got := queryStrings(t, db, "SELECT prediction FROM copse_predict('irb', 'iris') ORDER BY id"); !slices.Equal(got, labels) {
		t.Error("copse_predict's prediction differs from the engine's classes")
	}
	if n := queryFloats(t, db, "SELECT count(*) FROM copse_curve('irb') WHERE metric = 'holdout_loss'"); n[0] != float64(m.Boost.Rounds) {
		t.Errorf("curve: %v holdout points for %d rounds", n, m.Boost.Rounds)
	}
}

func encodeModel(t testing.TB, m *forest.Model) []byte {
	t.Helper()
	b, err := m.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// leaf_limit := n grows boosted trees best first: copse_trees shows no tree with more
// than n leaves, and the limit is kept with the model.
func TestBoostSQLLeafLimit(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE fr AS SELECT * FROM read_csv('../testdata/friedman1_train.csv')")
	trRows(t, db, "CALL copse_train('lim', 'fr', target := 'y', method := 'boosting', trees := 10, max_depth := 6, leaf_limit := 5)")
	got := trRows(t, db, "SELECT max(n), min(n), count(*) FROM (SELECT tree, count(*) AS n FROM copse_trees('lim') WHERE \"left\" IS NULL GROUP BY tree)")
	if len(got) != 1 || got[0][0] != "5" || got[0][2] != "10" {
		t.Errorf("leaves per tree (max, min, trees): %v, want max 5 over 10 trees", got)
	}
	m, _, err := h.loadModel(context.Background(), "lim")
	if err != nil {
		t.Fatal(err)
	}
	if m.Params.LeafLimit != 5 {
		t.Errorf("stored leaf limit %d, want 5", m.Params.LeafLimit)
	}
}

// holdout := 'source' stops boosting on the user's own validation rows: the model equals
// the engine's trained on the union with those rows marked, its curve's holdout loss is
// the log loss on them, and bad holdouts are refused by name, the catalog unchanged.
func TestBoostSQLHoldoutSource(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE bc AS SELECT row_number() OVER () AS id, * FROM read_csv('../testdata/breast_cancer.csv')")
	trExec(t, db, "CREATE TABLE bc_train AS SELECT * EXCLUDE (id) FROM bc WHERE id % 5 <> 0")
	trExec(t, db, "CREATE TABLE bc_valid AS SELECT * EXCLUDE (id) FROM bc WHERE id % 5 = 0")
	opts := "target := 'diagnosis', method := 'boosting', trees := 200, max_depth := 3, patience := 10, holdout := 'bc_valid'"
	row := bsTrain(t, db, "hv", "bc_train", opts)
	if row["oob_metric"] != "holdout_log_loss" {
		t.Fatalf("summary %v, want holdout_log_loss", row)
	}
	m, _, err := h.loadModel(context.Background(), "hv")
	if err != nil {
		t.Fatal(err)
	}
	b := m.Boost
	if len(b.HoldoutLoss) != b.Rounds || b.BestRound >= b.Rounds {
		t.Fatalf("rounds %d, holdout losses %d, best %d: want early stopping on the holdout", b.Rounds, len(b.HoldoutLoss), b.BestRound)
	}
	// The kept model's log loss on bc_valid, computed in SQL from copse_score, is the
	// curve's best holdout loss.
	got := trRows(t, db, "SELECT avg(-ln(CASE WHEN diagnosis = 'malignant' THEN p ELSE 1 - p END)) FROM "+
		"(SELECT diagnosis, copse_score('hv', v) AS p FROM bc_valid v)")
	ll, _ := strconv.ParseFloat(got[0][0], 64)
	best := b.HoldoutLoss[b.BestRound-1]
	if math.Abs(ll-best) > 1e-9 {
		t.Errorf("log loss on bc_valid %.12g, curve's best holdout loss %.12g", ll, best)
	}
	if m.Rows != 569 {
		t.Errorf("model rows %d, want 569 (training and holdout rows)", m.Rows)
	}
	trExec(t, db, "CREATE TABLE bc_short AS SELECT * EXCLUDE (mean_radius) FROM bc_valid")
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"CALL copse_train('bad', 'bc_train', " + opts + ", holdout_fraction := 0.2)", []string{"holdout and holdout_fraction"}},
		{"CALL copse_train('bad', 'bc_train', target := 'diagnosis', holdout := 'bc_valid')", []string{"holdout", "'boosting'"}},
		{"CALL copse_train('bad', 'bc_train', target := 'diagnosis', method := 'boosting', holdout := 'bc_short')", []string{`holdout "bc_short"`, `"mean_radius"`}},
		{"CALL copse_train('bad', 'bc_train', target := 'diagnosis', method := 'boosting', holdout := 'no_such_table')", []string{"holdout", "no_such_table"}},
		{"CALL copse_train('bad', 'bc_train', target := 'diagnosis', method := 'boosting', holdout := 'SELECT * FROM bc_valid WHERE false')", []string{"holdout", "no rows"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if got := trRows(t, db, "SELECT count(*) FROM copse_models() WHERE name = 'bad'"); got[0][0] != "0" {
		t.Errorf("model bad saved: %v", got)
	}
}
