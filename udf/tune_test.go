package udf

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"reflect"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/copse-dev/copse/forest"
)

// tuneCheck checks copse_tune's rows against the values want[i] the engine gives for
// combination i: equal bits, ranks that order the values (ties in grid order), one
// chosen row, rank 1, holding the stored version. It returns the chosen index.
func tuneCheck(t *testing.T, rows [][]string, want []float64, lowerBetter bool, version string) int {
	t.Helper()
	if len(rows) != len(want) {
		t.Fatalf("%d rows, want %d: %v", len(rows), len(want), rows)
	}
	order := make([]int, len(want))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		if lowerBetter {
			return cmpFloat(want[a], want[b])
		}
		return cmpFloat(want[b], want[a])
	})
	chosen := -1
	for i, r := range rows {
		if g := cvFloat(t, r[3]); math.Float64bits(g) != math.Float64bits(want[i]) {
			t.Errorf("%s: value %v, the engine gives %v", r[0], g, want[i])
		}
		if r[5] != strconv.Itoa(slices.Index(order, i)+1) {
			t.Errorf("%s: rank %s, want %d (values %v)", r[0], r[5], slices.Index(order, i)+1, want)
		}
		if r[6] == "true" {
			chosen = i
			if r[7] != version {
				t.Errorf("chosen row's version %s, want %s", r[7], version)
			}
		} else if r[7] != "NULL" {
			t.Errorf("%s: version %s on a row not chosen", r[0], r[7])
		}
	}
	if chosen != order[0] {
		t.Errorf("chosen row %d, want %d, the best", chosen, order[0])
	}
	return chosen
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// TestTuneOutOfBag tunes a forest on the breast cancer data by out-of-bag error: each
// value equals the engine's out-of-bag estimate for that combination, the best is stored
// with exactly its options, and a second run gives the same rows as a new version.
func TestTuneOutOfBag(t *testing.T) {
	h, db := cvHost(t)
	grid := []struct {
		depth int
		fps   float64
	}{{1, 0.2}, {1, 0.5}, {2, 0.2}, {2, 0.5}, {8, 0.2}, {8, 0.5}}
	d := trCSV(t, "breast_cancer.csv", "diagnosis")
	params := make([]forest.Params, len(grid))
	want := make([]float64, len(grid))
	for i, g := range grid {
		p := forest.DefaultParams(forest.MethodForest)
		p.Trees, p.Seed, p.MaxDepth, p.FeaturesPerSplit = 30, 5, g.depth, g.fps
		m, err := forest.Train(context.Background(), d, p)
		if err != nil {
			t.Fatal(err)
		}
		ms, err := forest.OOBMetrics(m, d)
		if err != nil {
			t.Fatal(err)
		}
		params[i], want[i] = p, forest.MetricValue(ms, "error")
	}
	const q = `SELECT * FROM copse_tune('tb', 'bc', target := 'diagnosis', trees := 30, seed := 5, threads := %d,
		grid := '{"max_depth": [1, 2, 8], "features_per_split": [0.2, 0.5]}')`
	first := trRows(t, db, fmt.Sprintf(q, 1))
	if first[0][0] != `{"max_depth": 1, "features_per_split": 0.2}` || first[0][1] != "out_of_bag" || first[0][2] != "error" || first[0][4] != "NULL" {
		t.Errorf("first row %v", first[0])
	}
	best := tuneCheck(t, first, want, true, "1")
	models := trRows(t, db, "SELECT name, version, method, trees, oob_metric, oob_value FROM copse_models() WHERE name = 'tb'")
	if len(models) != 1 || !slices.Equal(models[0][:5], []string{"tb", "1", "forest", "30", "error"}) ||
		math.Abs(cvFloat(t, models[0][5])-want[best]) > 1e-12 {
		t.Errorf("copse_models: %v, want tb version 1 with out-of-bag error %v", models, want[best])
	}
	m, _ := trModel(t, h, "tb@1")
	wp := params[best]
	wp.Task, wp.Impurity = forest.Classification, forest.Gini // as Train records them
	if !reflect.DeepEqual(m.Params, wp) {
		t.Errorf("stored params %+v\nwant the winning combination's %+v", m.Params, wp)
	}
	trSameModel(t, h, "tb@1", d, params[best])

	second := trRows(t, db, fmt.Sprintf(q, 2))
	for i := range first {
		first[i][7] = strings.Replace(first[i][7], "1", "2", 1)
	}
	if !slices.EqualFunc(first, second, slices.Equal) {
		t.Errorf("a second run on 2 threads gave other rows:\n%v\nfirst:\n%v", second, first)
	}

	// The grid as a STRUCT literal (DuckDB casts it to text) gives the same rows.
	lit := trRows(t, db, `SELECT * FROM copse_tune('tb', 'bc', target := 'diagnosis', trees := 30, seed := 5,
		grid := {'max_depth': [1, 2, 8], 'features_per_split': [0.2, 0.5]})`)
	for i := range lit {
		lit[i][7] = strings.Replace(lit[i][7], "3", "2", 1)
	}
	if !slices.EqualFunc(lit, second, slices.Equal) {
		t.Errorf("STRUCT grid gave other rows:\n%v\nJSON grid:\n%v", lit, second)
	}
}

// TestTuneCrossval tunes boosting on Friedman #1 by 3-fold cross-validation: values and
// standard deviations equal the engine's, the ranking follows the metric's direction
// (rmse lower, r2 higher) and the stored model is the winner trained on every row.
func TestTuneCrossval(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE f1 AS SELECT * FROM read_csv('../testdata/friedman1_train.csv')")
	d := csvDataset(t, filepath.Join("..", "testdata", "friedman1_train.csv"), "y", false)
	type combo struct {
		depth int
		rate  float64
	}
	grid := []combo{{2, 0.1}, {2, 0.3}, {4, 0.1}, {4, 0.3}}
	for _, tc := range []struct {
		metric string
		lower  bool
	}{{"rmse", true}, {"r2", false}} {
		t.Run(tc.metric, func(t *testing.T) {
			folds, err := forest.Folds(d, 3, 9)
			if err != nil {
				t.Fatal(err)
			}
			want, wantStd := make([]float64, len(grid)), make([]float64, len(grid))
			params := make([]forest.Params, len(grid))
			for i, g := range grid {
				p := forest.DefaultParams(forest.MethodBoosting)
				p.Trees, p.Seed, p.MaxDepth, p.LearningRate = 20, 9, g.depth, g.rate
				params[i] = p
				per, err := forest.CrossValidate(context.Background(), d, p, folds, nil)
				if err != nil {
					t.Fatal(err)
				}
				mean, std := forest.Summarize(per)
				want[i], wantStd[i] = forest.MetricValue(mean, tc.metric), forest.MetricValue(std, tc.metric)
			}
			metric := ""
			if tc.metric != "rmse" {
				metric = ", metric := '" + tc.metric + "'" // rmse is the default
			}
			rows := trRows(t, db, `SELECT * FROM copse_tune('fb', 'f1', target := 'y', method := 'boosting', trees := 20, seed := 9, folds := 3,
				grid := '{"max_depth": [2, 4], "learning_rate": [0.1, 0.3]}'`+metric+`)`)
			n := len(trRows(t, db, "SELECT * FROM copse_models() WHERE name = 'fb'"))
			best := tuneCheck(t, rows, want, tc.lower, strconv.Itoa(n))
			for i, r := range rows {
				if r[1] != "crossval" || r[2] != tc.metric || math.Float64bits(cvFloat(t, r[4])) != math.Float64bits(wantStd[i]) {
					t.Errorf("%v: want estimate crossval, metric %s, std %v", r, tc.metric, wantStd[i])
				}
			}
			trSameModel(t, h, "fb@"+strconv.Itoa(n), d, params[best])
		})
	}
}

// TestTuneErrors: bad grids, options and metrics name what is wrong and leave the
// catalog exactly as it was, whether they fail at bind or after training.
func TestTuneErrors(t *testing.T) {
	_, db := cvHost(t)
	trRows(t, db, "CALL copse_train('kept', 'iris', target := 'species', trees := 3)")
	const head = "FROM copse_tune('kept', 'iris', target := 'species', trees := 5, "
	for _, tc := range []struct {
		rest string
		want []string
	}{
		{`grid := '{"depth": [1, 2]}')`, []string{`copse_tune "kept"`, `unknown option "depth"`}},
		{`grid := '{"max_depth": []}')`, []string{`"max_depth" has an empty list`}},
		{`grid := '{"max_depth": [2, -1]}')`, []string{`grid combination {"max_depth": -1}`, "max_depth -1"}},
		{`grid := '{"max_depth": [2.5]}')`, []string{`grid combination {"max_depth": 2.5}`, "max_depth 2.5: want a whole number"}},
		{`grid := '{"max_depth": ["deep"]}')`, []string{`option "max_depth": value "deep": want a number`}},
		{`grid := '{"impurity": ["gini", "chaos"]}')`, []string{`grid combination {"impurity": "chaos"}`, `impurity "chaos"`}},
		{`grid := '{"max_depth": 4}')`, []string{`option "max_depth": want a list`}},
		{`grid := '{"seed": [1, 2]}')`, []string{`option "seed" cannot be tuned`}},
		{`grid := '{"max_depth": [1]}', max_depth := 3)`, []string{`option "max_depth" is also given as a fixed option`}},
		{`grid := '{"max_depth": [1], "max_depth": [2]}')`, []string{`option "max_depth" is given twice`}},
		{`grid := '{}')`, []string{"names no option"}},
		{`grid := 'max_depth=4')`, []string{`grid "max_depth=4"`, "JSON object"}},
		{`grid := '{"learning_rate": [0.1]}')`, []string{`grid combination {"learning_rate": 0.1}`, "learning_rate"}},
		{`grid := '{"max_depth": [1, 2]}', folds := 1)`, []string{`copse_tune "kept": folds 1`}},
		{`grid := '{"max_depth": [1, 2]}', method := 'boosting', folds := 0)`, []string{"folds := 0", "method 'boosting'"}},
		{`grid := '{"max_depth": [1, 2]}', metric := 'speed')`, []string{`metric "speed"`}},
		{`max_depth := 3)`, []string{"grid := ", "is required"}},
		{`grid := '{"max_depth": [1, 2]}', target := 'nope')`, []string{`copse_tune "kept"`, "nope"}},
		// Fails after the trainings: AUC is reported for two classes only.
		{`grid := '{"max_depth": [1, 2]}', metric := 'auc')`, []string{`copse_tune "kept"`, `metric "auc" does not apply`}},
		// Fails when the folds are drawn: more folds than rows.
		{`grid := '{"max_depth": [1, 2]}', folds := 200)`, []string{`copse_tune "kept"`, "folds 200"}},
	} {
		trWantErr(t, db, head+tc.rest, tc.want...)
	}
	trWantErr(t, db, `FROM copse_tune(NULL, 'iris', target := 'species', grid := '{"max_depth": [1]}')`, "copse_tune: the model name is NULL")
	trWantErr(t, db, `FROM copse_tune('a@b', 'iris', target := 'species', grid := '{"max_depth": [1]}')`, "copse_tune", "'@'")
}

// A cancelled copse_tune stops, reports it and stores nothing; meanwhile copse_jobs
// shows it training.
func TestTuneCancel(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE big AS SELECT i, (i * 7919 % 1000)::DOUBLE AS x, (i * 104729 % 997)::DOUBLE AS y FROM range(3000) r(i)")
	trRows(t, db, "CALL copse_train('kept', 'big', target := 'y', trees := 2)")
	before := trCatalog(t, db)
	ctx := context.Background()
	conn, err := db.Conn(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	stmt, cancel := context.WithCancel(ctx)
	defer cancel()
	release, err := h.Attach(stmt, conn)
	if err != nil {
		t.Fatal(err)
	}
	defer release()
	done := make(chan error, 1)
	go func() {
		// Far more trees than can finish while the test watches.
		_, err := trQuery(conn, `CALL copse_tune('slow', 'big', target := 'y', trees := 100000, grid := '{"max_depth": [2, 3]}')`)
		done <- err
	}()
	for {
		select {
		case err := <-done:
			t.Fatalf("the tuning ended before it was cancelled: %v", err)
		case <-time.After(10 * time.Millisecond):
		}
		if len(trRows(t, db, "FROM copse_jobs() WHERE model = 'slow' AND stage = 'training' AND trees_done > 0")) > 0 {
			break
		}
	}
	cancel()
	err = <-done
	if err == nil || !strings.Contains(err.Error(), context.Canceled.Error()) || !strings.Contains(err.Error(), `copse_tune "slow"`) {
		t.Errorf("cancelled tuning: %v", err)
	}
	if after := trCatalog(t, db); after != before {
		t.Errorf("catalog changed:\n%s\n%s", before, after)
	}
	if j := trRows(t, db, "FROM copse_jobs()"); len(j) != 0 {
		t.Errorf("jobs after the cancel: %v", j)
	}
}

// Without folds, a method that keeps no out-of-bag rows is tuned by 5-fold
// cross-validation (drawn from the default seed).
func TestTuneDefaultFolds(t *testing.T) {
	_, db := cvHost(t)
	d := trCSV(t, "iris.csv", "species")
	folds, err := forest.Folds(d, 5, forest.DefaultSeed)
	if err != nil {
		t.Fatal(err)
	}
	var want []float64
	for _, depth := range []int{1, 2, 3} {
		p := forest.DefaultParams(forest.MethodTree)
		p.MaxDepth = depth
		per, err := forest.CrossValidate(context.Background(), d, p, folds, nil)
		if err != nil {
			t.Fatal(err)
		}
		mean, _ := forest.Summarize(per)
		want = append(want, forest.MetricValue(mean, "error"))
	}
	rows := trRows(t, db, `SELECT * FROM copse_tune('it', 'iris', target := 'species', method := 'tree', grid := '{"max_depth": [1, 2, 3]}')`)
	tuneCheck(t, rows, want, true, "1")
	if rows[0][1] != "crossval" {
		t.Errorf("estimate %s, want crossval", rows[0][1])
	}
}

// A grid may vary the method; fixed options then need only suit each combination's
// method (learning_rate is refused by the default method, forest), and the stored
// version has the winner's method.
func TestTuneMethodGrid(t *testing.T) {
	_, db := cvHost(t)
	rows := trRows(t, db, `SELECT combination, estimate, chosen FROM copse_tune('im', 'iris', target := 'species', trees := 5, learning_rate := 0.5, folds := 3,
		grid := '{"method": ["boosting", "adaboost"]}')`)
	if len(rows) != 2 || rows[0][0] != `{"method": "boosting"}` || rows[1][0] != `{"method": "adaboost"}` || rows[0][1] != "crossval" {
		t.Fatalf("rows %v", rows)
	}
	want := "boosting"
	if rows[1][2] == "true" {
		want = "adaboost"
	}
	if got := trRows(t, db, "SELECT method FROM copse_models() WHERE name = 'im'"); len(got) != 1 || got[0][0] != want {
		t.Errorf("stored %v, want method %s", got, want)
	}
	trWantErr(t, db, `FROM copse_tune('im', 'iris', target := 'species', learning_rate := 0.5, grid := '{"max_depth": [1, 2]}')`,
		`copse_tune "im": learning_rate`)
}
