package udf

import (
	"database/sql"
	"fmt"
	"math"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// evalSetup trains the reg, bin and multi models of trainGen and makes new_rows, 1000
// fresh rows of the same kind (no unseen level, so every class is known).
func evalSetup(t *testing.T) (*Host, map[string]*forest.Model) {
	t.Helper()
	h := openHost(t)
	models := trainGen(t, h, forest.MethodForest)
	genTable(t, h.db, "new_rows", 1000, 99, false)
	return h, models
}

// engineLabelled is what the evaluation functions should see: the engine's predictions
// of new_rows and each row's actual class code (or value).
func engineLabelled(t *testing.T, h *Host, m *forest.Model, target string) (pred []float64, class []int32, actual []float64) {
	t.Helper()
	q := "SELECT * FROM new_rows"
	pred = enginePredict(t, h.db, m, q)
	col := readCols(t, h.db, q)[target]
	if m.Task != forest.Classification {
		return pred, nil, col.Values
	}
	for _, c := range col.Codes {
		k := -1
		for j, name := range m.Classes {
			if name == col.Levels[c] {
				k = j
			}
		}
		if k < 0 {
			t.Fatalf("class %q unknown to the model", col.Levels[c])
		}
		class = append(class, int32(k))
	}
	return pred, class, nil
}

func metricRows(t *testing.T, db *sql.DB, q string) map[string]float64 {
	t.Helper()
	rows, err := db.Query(q)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	out := map[string]float64{}
	for rows.Next() {
		var name string
		var v sql.NullFloat64
		if err := rows.Scan(&name, &v); err != nil {
			t.Fatal(err)
		}
		out[name] = math.NaN()
		if v.Valid {
			out[name] = v.Float64
		}
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// copse_evaluate returns the engine's metrics of the engine's predictions (which
// copse_score equals bit for bit, TestScoreMatchesEngine), for each task.
func TestEvaluateSQL(t *testing.T) {
	h, models := evalSetup(t)
	for _, c := range []struct {
		model, target string
		names         []string
	}{
		{"bin", "y_binary", []string{"error", "accuracy", "balanced_accuracy", "precision", "recall", "f1", "auc", "log_loss", "brier"}},
		{"multi", "y_class", []string{"error", "accuracy", "balanced_accuracy", "precision", "recall", "f1", "auc", "log_loss", "brier"}},
		{"reg", "y_value", []string{"mse", "rmse", "mae", "r2"}},
	} {
		t.Run(c.model, func(t *testing.T) {
			m := models[c.model]
			pred, class, actual := engineLabelled(t, h, m, c.target)
			var want []forest.Metric
			if class != nil {
				ev, err := forest.EvaluateClassification(class, pred, m.Width(), nil)
				if err != nil {
					t.Fatal(err)
				}
				want = ev.Metrics
			} else {
				var err error
				if want, err = forest.EvaluateRegression(actual, pred, nil); err != nil {
					t.Fatal(err)
				}
			}
			got := metricRows(t, h.db, fmt.Sprintf("SELECT metric, value FROM copse_evaluate('%s', 'new_rows')", c.model))
			for _, name := range c.names {
				w := forest.MetricValue(want, name)
				if g, ok := got[name]; !ok || math.IsNaN(w) || math.Abs(g-w) > 1e-12 {
					t.Errorf("%s = %v (present %v), engine %v", name, g, ok, w)
				}
			}
			if got["rows"] != 1000 {
				t.Errorf("rows = %v, want 1000", got["rows"])
			}
			if len(got) != len(want)+1 {
				t.Errorf("%d metrics %v, want %d", len(got), got, len(want)+1)
			}
		})
	}
	// A query source, NULL targets left out, and accuracy equal to plain SQL's count of
	// copse_label hits.
	got := metricRows(t, h.db, `SELECT * FROM copse_evaluate('bin', 'SELECT * REPLACE (CASE WHEN id % 4 = 0 THEN NULL ELSE y_binary END AS y_binary) FROM new_rows')`)
	if got["rows"] != 750 {
		t.Errorf("rows %v, want 750 (the rows with a target)", got["rows"])
	}
	acc := queryFloats(t, h.db, `SELECT avg((copse_label('bin', r) = y_binary)::DOUBLE) FROM new_rows r WHERE id % 4 <> 0`)
	if math.Abs(got["accuracy"]-acc[0]) > 1e-12 {
		t.Errorf("accuracy %v, SQL count %v", got["accuracy"], acc[0])
	}
	// A BOOLEAN target, trained through copse_train: its classes are 'false' and 'true',
	// and the source's BOOLEAN values match them.
	trRows(t, h.db, "CALL copse_train('flagged', 'SELECT x1, x2, colour, flag FROM new_rows', target := 'flag', trees := 5)")
	got = metricRows(t, h.db, "SELECT * FROM copse_evaluate('flagged', 'new_rows')")
	acc = queryFloats(t, h.db, `SELECT avg((copse_label('flagged', r) = flag::VARCHAR)::DOUBLE) FROM new_rows r`)
	if got["rows"] != 1000 || math.Abs(got["accuracy"]-acc[0]) > 1e-12 {
		t.Errorf("BOOLEAN target: rows %v accuracy %v; want 1000 and %v", got["rows"], got["accuracy"], acc[0])
	}
}

// copse_confusion counts every (actual, predicted) pair, zeros included, and agrees with
// a GROUP BY over copse_label.
func TestConfusionSQL(t *testing.T) {
	h, _ := evalSetup(t)
	rows, err := h.db.Query("SELECT actual, predicted, rows FROM copse_confusion('multi', 'new_rows')")
	if err != nil {
		t.Fatal(err)
	}
	got := map[[2]string]int64{}
	var total int64
	for rows.Next() {
		var a, p string
		var n int64
		if err := rows.Scan(&a, &p, &n); err != nil {
			t.Fatal(err)
		}
		got[[2]string{a, p}] = n
		total += n
	}
	rows.Close()
	if len(got) != 9 || total != 1000 {
		t.Fatalf("%d cells holding %d rows, want 9 cells holding 1000", len(got), total)
	}
	check, err := h.db.Query("SELECT y_class, copse_label('multi', r), count(*) FROM new_rows r GROUP BY ALL")
	if err != nil {
		t.Fatal(err)
	}
	defer check.Close()
	for check.Next() {
		var a, p string
		var n int64
		if err := check.Scan(&a, &p, &n); err != nil {
			t.Fatal(err)
		}
		if got[[2]string{a, p}] != n {
			t.Errorf("actual %s predicted %s: %d rows, GROUP BY says %d", a, p, got[[2]string{a, p}], n)
		}
	}
}

// copse_roc: the engine's curve of copse_score's positive probabilities, one point per
// distinct score after the (+Inf, 0, 0) start, ending at (1, 1).
func TestROCSQL(t *testing.T) {
	h, models := evalSetup(t)
	m := models["bin"]
	pred, class, _ := engineLabelled(t, h, m, "y_binary")
	score, pos := make([]float64, len(class)), make([]bool, len(class))
	for i, a := range class {
		score[i], pos[i] = pred[2*i+1], a == 1
	}
	want, err := forest.ROC(score, pos, nil)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := h.db.Query("SELECT threshold, true_positive_rate, false_positive_rate FROM copse_roc('bin', 'new_rows')")
	if err != nil {
		t.Fatal(err)
	}
	var got []forest.ROCPoint
	for rows.Next() {
		var p forest.ROCPoint
		if err := rows.Scan(&p.Threshold, &p.TruePositiveRate, &p.FalsePositiveRate); err != nil {
			t.Fatal(err)
		}
		got = append(got, p)
	}
	rows.Close()
	distinct := queryFloats(t, h.db, "SELECT count(DISTINCT copse_score('bin', r))::DOUBLE FROM new_rows r")
	if len(got) != len(want) || float64(len(got)) != distinct[0]+1 {
		t.Fatalf("%d points, engine %d, distinct scores %v + 1", len(got), len(want), distinct[0])
	}
	for i := range got {
		if got[i] != want[i] {
			t.Errorf("point %d %+v, engine %+v", i, got[i], want[i])
		}
	}
	if last := got[len(got)-1]; last.TruePositiveRate != 1 || last.FalsePositiveRate != 1 || !math.IsInf(got[0].Threshold, 1) {
		t.Errorf("curve from %+v to %+v, want from (+Inf, 0, 0) to rates 1, 1", got[0], last)
	}
}

// copse_calibration: every bin listed, rows summing to the source's, and per bin the
// mean probability and positive share that plain SQL finds with the same edges.
func TestCalibrationSQL(t *testing.T) {
	h, models := evalSetup(t)
	for _, c := range []struct {
		args string
		bins int
	}{{"", 10}, {", bins := 4", 4}} {
		q := "SELECT bin, mean_predicted, observed_rate, rows FROM copse_calibration('bin', 'new_rows'" + c.args + ") ORDER BY bin"
		rows, err := h.db.Query(q)
		if err != nil {
			t.Fatal(err)
		}
		type calRow struct {
			mean, rate sql.NullFloat64
			n          int64
		}
		var got []calRow
		for rows.Next() {
			var b int64
			var r calRow
			if err := rows.Scan(&b, &r.mean, &r.rate, &r.n); err != nil {
				t.Fatal(err)
			}
			if b != int64(len(got)+1) {
				t.Fatalf("%s: bin %d in place %d", q, b, len(got)+1)
			}
			got = append(got, r)
		}
		rows.Close()
		if len(got) != c.bins {
			t.Fatalf("%s: %d bins, want %d", q, len(got), c.bins)
		}
		// Bin of p: the number of inner edges k/bins below p, plus one.
		check := fmt.Sprintf(`WITH s AS (SELECT copse_score('bin', r) AS p, (y_binary = '%s')::DOUBLE AS y FROM new_rows r),
			b AS (SELECT p, y, 1 + (SELECT count(*) FROM range(1, %d) e(k) WHERE k * (1 / %d::DOUBLE) < p) AS bin FROM s)
			SELECT bin, avg(p), avg(y), count(*) FROM b GROUP BY bin ORDER BY bin`, models["bin"].Classes[1], c.bins, c.bins)
		crows, err := h.db.Query(check)
		if err != nil {
			t.Fatal(err)
		}
		var total int64
		for crows.Next() {
			var b, n int64
			var mean, rate float64
			if err := crows.Scan(&b, &mean, &rate, &n); err != nil {
				t.Fatal(err)
			}
			r := got[b-1]
			if r.n != n || math.Abs(r.mean.Float64-mean) > 1e-12 || math.Abs(r.rate.Float64-rate) > 1e-12 {
				t.Errorf("%s: bin %d = %+v, SQL %v %v %d", q, b, r, mean, rate, n)
			}
			total += n
		}
		crows.Close()
		var sum int64
		for _, r := range got {
			sum += r.n
			if r.n == 0 && (r.mean.Valid || r.rate.Valid) {
				t.Errorf("%s: empty bin with values %+v", q, r)
			}
		}
		if sum != 1000 || total != 1000 {
			t.Errorf("%s: bins hold %d rows, SQL %d, want 1000", q, sum, total)
		}
	}
	// Three classes: the predicted class's probability against whether it was right;
	// the rows weighted by their mean hit rate give the accuracy.
	acc := metricRows(t, h.db, "SELECT metric, value FROM copse_evaluate('multi', 'new_rows')")["accuracy"]
	hits := queryFloats(t, h.db, "SELECT sum(observed_rate * rows) / sum(rows) FROM copse_calibration('multi', 'new_rows') WHERE rows > 0")
	if math.Abs(hits[0]-acc) > 1e-12 {
		t.Errorf("calibration hit rate %v, accuracy %v", hits[0], acc)
	}
}

// Bad calls fail with errors naming what is wrong, and leave the catalog as it was.
func TestEvaluateSQLErrors(t *testing.T) {
	h, _ := evalSetup(t)
	noTarget := `'SELECT x1, x2, colour, flag, day, small_int FROM new_rows'`
	cases := []struct {
		q    string
		want []string
	}{
		{"FROM copse_evaluate('nope', 'new_rows')", []string{"copse_evaluate", "model not found", `"nope"`}},
		{"FROM copse_evaluate(NULL, 'new_rows')", []string{"copse_evaluate", "model name is NULL"}},
		{"FROM copse_evaluate('bin', NULL)", []string{"copse_evaluate", "source is NULL"}},
		{"FROM copse_evaluate('bin', " + noTarget + ")", []string{"copse_evaluate", `target column "y_binary"`}},
		{"FROM copse_evaluate('reg', " + noTarget + ")", []string{"copse_evaluate", `target column "y_value"`}},
		{"FROM copse_confusion('multi', " + noTarget + ")", []string{"copse_confusion", `target column "y_class"`}},
		{"FROM copse_evaluate('bin', 'no_such_table')", []string{"copse_evaluate", "no_such_table"}},
		{"FROM copse_evaluate('bin', 'SELECT * REPLACE (''maybe'' AS y_binary) FROM new_rows')", []string{"copse_evaluate", `"y_binary"`, "'maybe'", "not one of the model's classes"}},
		{"FROM copse_evaluate('reg', 'SELECT * REPLACE (''x'' AS y_value) FROM new_rows')", []string{"copse_evaluate", `"y_value"`, "cast it to a number"}},
		{"FROM copse_evaluate('bin', 'SELECT x1, y_binary FROM new_rows')", []string{"x2"}},
		{"FROM copse_calibration('bin', 'new_rows', bins := 0)", []string{"copse_calibration", "bins := 0"}},
		{"FROM copse_calibration('bin', 'new_rows', bins := 5000)", []string{"copse_calibration", "bins := 5000"}},
		{"FROM copse_calibration('reg', 'new_rows')", []string{"copse_calibration", `"reg"`, "regression"}},
		{"FROM copse_roc('reg', 'new_rows')", []string{"copse_roc", `"reg"`, "regression", "two classes"}},
		{"FROM copse_roc('multi', 'new_rows')", []string{"copse_roc", `"multi"`, "3 classes", "two classes"}},
		{"FROM copse_confusion('reg', 'new_rows')", []string{"copse_confusion", "regression"}},
		{"FROM copse_roc('bin', 'SELECT * FROM new_rows WHERE y_binary = ''late''')", []string{"copse_roc", "both outcomes"}},
		{"FROM copse_evaluate('bin', 'SELECT * FROM new_rows WHERE false')", []string{"copse_evaluate", "no row"}},
	}
	for _, c := range cases {
		trWantErr(t, h.db, c.q, c.want...)
	}
}
