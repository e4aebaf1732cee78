package udf

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/copse-dev/copse/forest"
)

// features of genTable in SQL order, for struct_pack.
const genFeatures = "x1, x2, colour, flag, day, small_int"

// trainGen trains regression, binary and multiclass models on genTable data.
func trainGen(t testing.TB, h *Host, method forest.Method) map[string]*forest.Model {
	t.Helper()
	genTable(t, h.db, "train_rows", 3000, 1, false)
	models := map[string]*forest.Model{}
	for name, target := range map[string]string{"reg": "y_value", "bin": "y_binary", "multi": "y_class"} {
		q := fmt.Sprintf("SELECT id, %s, %s FROM train_rows", genFeatures, target)
		models[name] = trainOn(t, h, name, q, target, smallParams(method, 15))
	}
	return models
}

// TestScoreMatchesEngine checks that SQL scores equal the engine's batch predictions bit
// for bit, for every task and every way of passing the row, on rows with NULLs and an
// unseen level.
func TestScoreMatchesEngine(t *testing.T) {
	h := openHost(t)
	for _, method := range []forest.Method{forest.MethodForest, forest.MethodTree} {
		models := trainGen(t, h, method)
		genTable(t, h.db, "new_rows", 5000, 99, true) // 'mauve' is unseen, teal absent
		mustExec(t, h.db, "CREATE TYPE IF NOT EXISTS colour_enum AS ENUM ('mauve', 'blue', 'red', 'green', 'teal')")
		want := map[string][]float64{}
		for name, m := range models {
			want[name] = enginePredict(t, h.db, m, "SELECT * FROM new_rows ORDER BY id")
		}
		rows := []string{
			"r",
			"struct_pack(" + genFeatures + ")",
			"{'X1': x1, 'x2': x2, 'Colour': colour, 'flag': flag, 'day': day, 'small_int': small_int, 'extra': 'ignored'}",
			"struct_pack(x1, x2, colour := colour::colour_enum, flag, day, small_int)",
		}
		for _, row := range rows {
			q := func(f string) string {
				return fmt.Sprintf("SELECT %s FROM new_rows r ORDER BY id", strings.ReplaceAll(f, "ROW", row))
			}
			sameBits(t, string(method)+" regression "+row, queryFloats(t, h.db, q("copse_score('reg', ROW)")), want["reg"])
			sameBits(t, string(method)+" binary "+row, queryFloats(t, h.db, q("copse_score('bin', ROW)")), column(want["bin"], 2, 1))
			m := models["multi"]
			for k, class := range m.Classes {
				sameBits(t, string(method)+" multiclass "+class, queryFloats(t, h.db, q("copse_score('multi', ROW, '"+class+"')")), column(want["multi"], 3, k))
			}
			for _, name := range []string{"bin", "multi"} {
				m := models[name]
				got := queryStrings(t, h.db, q("copse_label('"+name+"', ROW)"))
				W := m.Width()
				for i, g := range got {
					if w := m.Classes[forest.Class(want[name][i*W:(i+1)*W])]; g != w {
						t.Fatalf("%s %s label row %d: got %q want %q", method, name, i, g, w)
					}
				}
			}
		}
		// A NULL row is NULL; a row of NULL fields is scored as all missing.
		got := queryFloats(t, h.db, `SELECT copse_score('reg', s) FROM (VALUES (NULL::STRUCT(x1 DOUBLE, x2 DOUBLE, colour VARCHAR, flag BOOLEAN, day DATE, small_int INTEGER)),
			({'x1': NULL::DOUBLE, 'x2': NULL::DOUBLE, 'colour': NULL::VARCHAR, 'flag': NULL::BOOLEAN, 'day': NULL::DATE, 'small_int': NULL::INTEGER})) v(s)`)
		nan := math.NaN()
		allMissing := models["reg"].PredictRow([]float64{nan, nan, nan, nan, nan, nan}, make([]float64, 1))
		if len(got) != 2 || !math.IsNaN(got[0]) || math.Float64bits(got[1]) != math.Float64bits(allMissing[0]) {
			t.Fatalf("NULL row and NULL fields: got %v, want [NaN %v]", got, allMissing[0])
		}
	}
}

// TestScoreOpenData scores the shared test sets through SQL and compares with the engine.
func TestScoreOpenData(t *testing.T) {
	h := openHost(t)
	for _, c := range []struct{ file, target, class string }{
		{"iris.csv", "species", "virginica"},
		{"breast_cancer.csv", "diagnosis", ""},
		{"friedman1_train.csv", "y", ""},
	} {
		mustExec(t, h.db, fmt.Sprintf("CREATE OR REPLACE TABLE d AS SELECT * FROM read_csv('../testdata/%s')", c.file))
		m := trainOn(t, h, c.file, "SELECT * FROM d", c.target, smallParams(forest.MethodForest, 10))
		want := enginePredict(t, h.db, m, "SELECT * FROM d")
		q := "SELECT copse_score(?, d) FROM d"
		args := []any{c.file}
		k := 0
		if c.class != "" {
			q = "SELECT copse_score(?, d, ?) FROM d"
			args = append(args, c.class)
			k = slices.Index(m.Classes, c.class)
		} else if m.Task == forest.Classification {
			k = 1
		}
		sameBits(t, c.file, queryFloats(t, h.db, q, args...), column(want, m.Width(), k))
	}
}

// TestScoreModelNotConstant resolves model names per row (a column, a parameter), also
// when one chunk names several models.
func TestScoreModelNotConstant(t *testing.T) {
	h := openHost(t)
	models := trainGen(t, h, forest.MethodForest)
	genTable(t, h.db, "new_rows", 4000, 7, true)
	want := enginePredict(t, h.db, models["reg"], "SELECT * FROM new_rows ORDER BY id")
	wantBin := column(enginePredict(t, h.db, models["bin"], "SELECT * FROM new_rows ORDER BY id"), 2, 1)

	sameBits(t, "parameter", queryFloats(t, h.db, "SELECT copse_score($1, r) FROM new_rows r ORDER BY id", "reg"), want)

	got := queryFloats(t, h.db, `SELECT copse_score(CASE WHEN id % 3 = 0 THEN 'bin' WHEN id % 3 = 1 THEN 'reg' END, r)
		FROM new_rows r ORDER BY id`)
	for i, g := range got {
		var w float64
		switch i % 3 {
		case 0:
			w = wantBin[i]
		case 1:
			w = want[i]
		default:
			w = math.NaN() // NULL model name
		}
		if math.Float64bits(g) != math.Float64bits(w) && !(math.IsNaN(g) && math.IsNaN(w)) {
			t.Fatalf("row %d: got %v want %v", i, g, w)
		}
	}
	// A per-row class argument.
	m := models["multi"]
	all := enginePredict(t, h.db, m, "SELECT * FROM new_rows ORDER BY id")
	got = queryFloats(t, h.db, `SELECT copse_score('multi', r, CASE id % 3 WHEN 0 THEN 'low' WHEN 1 THEN 'mid' ELSE 'high' END) FROM new_rows r ORDER BY id`)
	for i, g := range got {
		k := slices.Index(m.Classes, []string{"low", "mid", "high"}[i%3])
		if math.Float64bits(g) != math.Float64bits(all[i*3+k]) {
			t.Fatalf("per-row class, row %d: got %v want %v", i, g, all[i*3+k])
		}
	}
	wantErr(t, h.db, "SELECT copse_score(n, r) FROM new_rows r, (SELECT 'nope' AS n)", "nope", "model not found")
}

// TestScoreErrors checks that each bad call fails with a message naming what is wrong.
func TestScoreErrors(t *testing.T) {
	h := openHost(t)
	trainGen(t, h, forest.MethodTree)
	genTable(t, h.db, "new_rows", 100, 3, false)
	for _, c := range []struct {
		q     string
		parts []string
	}{
		{"SELECT copse_score('nope', r) FROM new_rows r", []string{"copse_score", "model not found", `"nope"`}},
		{"SELECT copse_score('reg@7', r) FROM new_rows r", []string{"model not found", `"reg@7"`}},
		{"SELECT copse_score('reg@x', r) FROM new_rows r", []string{"reg@x", "version"}},
		{"SELECT copse_score('reg', {'x1': x1, 'x2': x2}) FROM new_rows", []string{`"colour"`, `"reg"`, "lacks", `"x1"`}},
		{"SELECT copse_score('reg', struct_pack(x1, x2, colour, flag, small_int, day := 'monday')) FROM new_rows",
			[]string{`feature "day" is numeric`, `field "day" is VARCHAR`, `"reg"`}},
		{"SELECT copse_score('reg', struct_pack(x1, x2, flag, day, small_int, colour := 3)) FROM new_rows",
			[]string{`feature "colour" is categorical`, `field "colour" is INTEGER`}},
		{"SELECT copse_score('reg', x1) FROM new_rows", []string{"STRUCT", "DOUBLE"}},
		{"SELECT copse_score(NULL, r) FROM new_rows r", []string{"model name is NULL"}},
		{"SELECT copse_label('reg', r) FROM new_rows r", []string{"regression", `"reg"`}},
		{"SELECT copse_score('reg', r, 'a') FROM new_rows r", []string{"regression", "class"}},
		{"SELECT copse_score('multi', r) FROM new_rows r", []string{`"multi"`, "3 classes", "'high'", "'low'", "'mid'"}},
		{"SELECT copse_score('multi', r, 'huge') FROM new_rows r", []string{`"multi"`, "'huge'", "'mid'"}},
		{"SELECT copse_score('multi', r, CASE WHEN id > 50 THEN 'huge' ELSE 'low' END) FROM new_rows r", []string{"'huge'"}},
	} {
		wantErr(t, h.db, c.q, c.parts...)
	}
	// The error chain keeps its sentinels inside the host.
	site := &scoreSite{h: h, fn: "copse_score", row: doubleStruct("x1")}
	if _, err := site.newScorer("reg"); !errors.Is(err, ErrRow) {
		t.Fatalf("missing feature: %v does not wrap ErrRow", err)
	}
	if _, err := site.newScorer("nope"); !errors.Is(err, ErrNoModel) {
		t.Fatalf("unknown model: %v does not wrap ErrNoModel", err)
	}
}

// TestScoreQuotedModelName stores and scores a model whose name holds quotes and SQL.
func TestScoreQuotedModelName(t *testing.T) {
	h := openHost(t)
	genTable(t, h.db, "train_rows", 500, 1, false)
	const name = `it's "late"; DROP TABLE train_rows; --`
	m := trainOn(t, h, name, "SELECT x1, x2, colour, y_binary FROM train_rows", "y_binary", smallParams(forest.MethodForest, 5))
	want := column(enginePredict(t, h.db, m, "SELECT * FROM train_rows"), 2, 1)
	lit := "'" + strings.ReplaceAll(name, "'", "''") + "'"
	sameBits(t, "literal", queryFloats(t, h.db, "SELECT copse_score("+lit+", t) FROM train_rows t"), want)
	sameBits(t, "parameter", queryFloats(t, h.db, "SELECT copse_score(?, t) FROM train_rows t", name), want)
	got := queryFloats(t, h.db, "SELECT probability FROM copse_predict("+lit+", 'train_rows')")
	sameBits(t, "copse_predict", got, want)
}

// TestScoreNewVersion checks that 'name' follows the latest version and 'name@1' stays.
func TestScoreNewVersion(t *testing.T) {
	h := openHost(t)
	genTable(t, h.db, "train_rows", 500, 1, false)
	q := "SELECT x1, x2, y_value FROM train_rows"
	m1 := trainOn(t, h, "m", q, "y_value", smallParams(forest.MethodForest, 3))
	p := smallParams(forest.MethodForest, 3)
	p.Seed = 42
	m2 := trainOn(t, h, "m", q, "y_value", p)
	sameBits(t, "m@1", queryFloats(t, h.db, "SELECT copse_score('m@1', t) FROM train_rows t"), enginePredict(t, h.db, m1, q))
	sameBits(t, "m", queryFloats(t, h.db, "SELECT copse_score('m', t) FROM train_rows t"), enginePredict(t, h.db, m2, q))
}

// TestScorePredict checks copse_predict: source columns pass through in order with their
// own types, followed by the prediction columns of each task; the source may be a table
// name, a SELECT, a table function call or a TEMP table.
func TestScorePredict(t *testing.T) {
	h := openHost(t)
	models := trainGen(t, h, forest.MethodForest)
	genTable(t, h.db, "new_rows", 3000, 11, true)
	const src = "SELECT * FROM new_rows ORDER BY id"
	want := map[string][]float64{}
	for name, m := range models {
		want[name] = enginePredict(t, h.db, m, src)
	}
	// Column names and types.
	for _, c := range []struct {
		model string
		tail  []string
	}{
		{"reg", []string{"prediction DOUBLE"}},
		{"bin", []string{"prediction VARCHAR", "probability DOUBLE"}},
		{"multi", []string{"prediction VARCHAR", "probabilities MAP(VARCHAR, DOUBLE)"}},
	} {
		got := queryStrings(t, h.db, "SELECT column_name || ' ' || column_type FROM (DESCRIBE SELECT * FROM copse_predict(?, 'new_rows'))", c.model)
		base := queryStrings(t, h.db, "SELECT column_name || ' ' || column_type FROM (DESCRIBE SELECT * FROM new_rows)")
		if wantCols := append(base, c.tail...); !slices.Equal(got, wantCols) {
			t.Fatalf("%s columns:\n got %v\nwant %v", c.model, got, wantCols)
		}
	}
	dir := t.TempDir()
	mustExec(t, h.db, "COPY (SELECT * FROM new_rows ORDER BY id) TO '"+dir+"/rows.parquet'")
	conn, err := h.db.Conn(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	if _, err := conn.ExecContext(context.Background(), "CREATE TEMP TABLE tmp_rows AS SELECT * FROM new_rows"); err != nil {
		t.Fatal(err)
	}
	for _, source := range []string{"new_rows", "SELECT * FROM new_rows WHERE id >= 0", "read_parquet('" + dir + "/rows.parquet')", "tmp_rows"} {
		q := func(cols string) string {
			return "SELECT " + cols + " FROM copse_predict(?, '" + strings.ReplaceAll(source, "'", "''") + "') ORDER BY id"
		}
		sameBits(t, "regression "+source, connFloats(t, conn, q("prediction"), "reg"), want["reg"])
		sameBits(t, "binary "+source, connFloats(t, conn, q("probability"), "bin"), column(want["bin"], 2, 1))
		m := models["multi"]
		for k, class := range m.Classes {
			sameBits(t, "multiclass "+source, connFloats(t, conn, q("probabilities['"+class+"']"), "multi"), column(want["multi"], 3, k))
		}
		labels := connStrings(t, conn, q("prediction"), "bin")
		for i, l := range labels {
			if w := models["bin"].Classes[forest.Class(want["bin"][2*i:2*i+2])]; l != w {
				t.Fatalf("binary label %s row %d: got %q want %q", source, i, l, w)
			}
		}
		// Pass-through: the source columns come back unchanged.
		same := connFloats(t, conn, "SELECT count(*) FROM (SELECT * EXCLUDE (prediction, probability) FROM copse_predict(?, '"+
			strings.ReplaceAll(source, "'", "''")+"') EXCEPT ALL SELECT * FROM new_rows)", "bin")
		if same[0] != 0 {
			t.Fatalf("%s: %v rows differ from the source", source, same[0])
		}
	}
	wantErr(t, h.db, "FROM copse_predict('nope', 'new_rows')", "copse_predict", "model not found")
	wantErr(t, h.db, "FROM copse_predict('reg', 'no_such_table')", "no_such_table")
	wantErr(t, h.db, "FROM copse_predict('reg', 'SELECT x1 FROM new_rows')", `"x2"`, "lacks")
}

func connFloats(t testing.TB, conn *sql.Conn, q string, args ...any) []float64 {
	t.Helper()
	rows, err := conn.QueryContext(context.Background(), q, args...)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	var out []float64
	for rows.Next() {
		var v sql.NullFloat64
		if err := rows.Scan(&v); err != nil {
			t.Fatal(err)
		}
		out = append(out, v.Float64)
		if !v.Valid {
			out[len(out)-1] = math.NaN()
		}
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

func connStrings(t testing.TB, conn *sql.Conn, q string, args ...any) []string {
	t.Helper()
	rows, err := conn.QueryContext(context.Background(), q, args...)
	if err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var v string
		if err := rows.Scan(&v); err != nil {
			t.Fatal(err)
		}
		out = append(out, v)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// TestScoreConcurrent scores on four connections while a fifth trains with copse_train:
// every result must equal the serial run. Run it with -race.
func TestScoreConcurrent(t *testing.T) {
	h := openHost(t)
	trainGen(t, h, forest.MethodForest)
	genTable(t, h.db, "new_rows", 12000, 21, true)
	mustExec(t, h.db, "SET threads = 4")
	queries := []string{
		"SELECT copse_score('reg', r) FROM new_rows r ORDER BY id",
		"SELECT copse_score('bin', r) FROM new_rows r ORDER BY id",
		"SELECT copse_score('multi', r, 'mid') FROM new_rows r ORDER BY id",
		"SELECT hash(copse_label('multi', r))::DOUBLE FROM new_rows r ORDER BY id",
		"SELECT copse_score(CASE WHEN id % 2 = 0 THEN 'reg' ELSE 'bin' END, r) FROM new_rows r ORDER BY id",
		"SELECT probability FROM copse_predict('bin', 'new_rows') ORDER BY id",
	}
	serial := make([][]float64, len(queries))
	for i, q := range queries {
		serial[i] = queryFloats(t, h.db, q)
	}
	genTable(t, h.db, "more_rows", 2000, 5, false)
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	type trainedN struct {
		n   int
		err error
	}
	trained := make(chan trainedN, 1)
	go func() { // the fifth connection: trains with copse_train until the scorers are done
		conn, err := h.db.Conn(context.Background())
		if err != nil {
			trained <- trainedN{0, err}
			return
		}
		defer conn.Close()
		n := 0
		for ctx.Err() == nil {
			var version int
			err := conn.QueryRowContext(context.Background(), `SELECT version FROM copse_train('retrained',
				'SELECT x1, x2, colour, flag, y_value FROM more_rows', target := 'y_value', trees := 5, seed := ?)`, n+1).Scan(&version)
			if err != nil {
				trained <- trainedN{n, err}
				return
			}
			n++
		}
		trained <- trainedN{n, nil}
	}()
	errs := make(chan error, 4)
	for w := range 4 {
		go func() {
			errs <- func() error {
				conn, err := h.db.Conn(ctx)
				if err != nil {
					return err
				}
				defer conn.Close()
				for round := range 2 {
					for k := range queries {
						i := (k + w) % len(queries)
						got := connFloats(t, conn, queries[i])
						for r := range got {
							if math.Float64bits(got[r]) != math.Float64bits(serial[i][r]) && !(math.IsNaN(got[r]) && math.IsNaN(serial[i][r])) {
								return fmt.Errorf("worker %d round %d: %s: row %d: %v, serial %v", w, round, queries[i], r, got[r], serial[i][r])
							}
						}
					}
				}
				return nil
			}()
		}()
	}
	for range 4 {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
	cancel()
	tr := <-trained
	if tr.err != nil {
		t.Fatalf("training while scoring: %v", tr.err)
	}
	if tr.n == 0 {
		t.Fatal("no model was trained while scoring")
	}
	got := queryFloats(t, h.db, "SELECT count(*) FROM "+catalogTable+" WHERE name = 'retrained'")
	if got[0] != float64(tr.n) {
		t.Fatalf("%v versions of retrained, %d trainings", got[0], tr.n)
	}
}

// TestScoreBooleanLevels scores a categorical feature trained on 'true'/'false' text from
// a BOOLEAN field: the same as passing the text.
func TestScoreBooleanLevels(t *testing.T) {
	h := openHost(t)
	genTable(t, h.db, "train_rows", 1000, 1, false)
	m := trainOn(t, h, "m", "SELECT x1, flag::VARCHAR AS flag, y_value FROM train_rows", "y_value", smallParams(forest.MethodForest, 5))
	if m.Features[1].Kind != forest.Categorical {
		t.Fatalf("flag is %v", m.Features[1].Kind)
	}
	want := enginePredict(t, h.db, m, "SELECT x1, flag::VARCHAR AS flag FROM train_rows")
	sameBits(t, "BOOLEAN", queryFloats(t, h.db, "SELECT copse_score('m', struct_pack(x1, flag)) FROM train_rows"), want)
	sameBits(t, "VARCHAR", queryFloats(t, h.db, "SELECT copse_score('m', struct_pack(x1, flag := flag::VARCHAR)) FROM train_rows"), want)
}

// TestScoreNoPerRowAllocation holds scoring to a bounded number of Go allocations per
// chunk: far fewer than one per row, for numeric, text and ENUM inputs and labels.
func TestScoreNoPerRowAllocation(t *testing.T) {
	h := openHost(t)
	trainGen(t, h, forest.MethodTree)
	const rows = 200_000
	genTable(t, h.db, "new_rows", rows, 5, true)
	mustExec(t, h.db, "CREATE TYPE IF NOT EXISTS colour_enum AS ENUM ('mauve', 'blue', 'red', 'green', 'teal')")
	for _, q := range []string{
		"SELECT sum(copse_score('reg', r)) FROM new_rows r",
		"SELECT sum(copse_score('multi', struct_pack(x1, x2, colour := colour::colour_enum, flag, day, small_int), 'mid')) FROM new_rows",
		"SELECT count(DISTINCT copse_label('bin', r)) FROM new_rows r",
	} {
		queryFloats(t, h.db, q) // warm the model cache and scratch pools
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		queryFloats(t, h.db, q)
		runtime.ReadMemStats(&after)
		// A few allocations per 2048-row chunk (DuckDB's callback plumbing) are fine.
		n := after.Mallocs - before.Mallocs
		t.Logf("%s: %d allocations for %d rows", q, n, rows)
		if n > rows/64 {
			t.Errorf("%s: %d allocations for %d rows", q, n, rows)
		}
	}
}

// TestScoreExplainAndPrepare: bind checks the call when a statement is planned (EXPLAIN,
// prepare), and a prepared statement scores the same on every execution.
func TestScoreExplainAndPrepare(t *testing.T) {
	h := openHost(t)
	models := trainGen(t, h, forest.MethodForest)
	genTable(t, h.db, "new_rows", 3000, 8, true)
	mustExec(t, h.db, "EXPLAIN SELECT copse_score('reg', r) FROM new_rows r")
	wantErr(t, h.db, "EXPLAIN SELECT copse_score('nope', r) FROM new_rows r", "model not found")
	wantErr(t, h.db, "EXPLAIN SELECT copse_score('reg', {'x1': x1}) FROM new_rows", `"x2"`)
	want := enginePredict(t, h.db, models["reg"], "SELECT * FROM new_rows ORDER BY id")
	stmt, err := h.db.Prepare("SELECT copse_score('reg', r) FROM new_rows r ORDER BY id")
	if err != nil {
		t.Fatal(err)
	}
	defer stmt.Close()
	for range 3 {
		rows, err := stmt.Query()
		if err != nil {
			t.Fatal(err)
		}
		var got []float64
		for rows.Next() {
			var v float64
			if err := rows.Scan(&v); err != nil {
				t.Fatal(err)
			}
			got = append(got, v)
		}
		rows.Close()
		sameBits(t, "prepared", got, want)
	}
}
