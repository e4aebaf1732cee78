package udf

import (
	"context"
	"database/sql"
	"encoding/csv"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/copse-dev/copse/forest"
)

// ptsRows is the size of the pts fixture.
const ptsRows = 300

// ptsTable is the main fixture: label and value depend on x; id is a key, w a weight and
// l a column copse cannot use. Every value is exact in binary, so the Go mirror below
// (ptsGo) computes the same numbers.
const ptsTable = `CREATE TABLE pts AS SELECT
	i AS id,
	(i * 37 % 101)::DOUBLE / 10 AS x,
	(i * 13 % 17)::INTEGER AS y,
	['red', 'green', 'blue'][i % 3 + 1] AS color,
	CASE WHEN i * 37 % 101 > 50 THEN 'yes' ELSE 'no' END AS label,
	(i * 37 % 101)::DOUBLE * 0.5 + (i % 3)::DOUBLE AS value,
	(1 + i % 4)::INTEGER AS w,
	[i] AS l
FROM range(300) r(i)`

// ptsGo mirrors ptsTable.
type ptsGo struct {
	x, y, value, w []float64
	color, label   []string
}

func ptsData() ptsGo {
	var p ptsGo
	colors := []string{"red", "green", "blue"}
	for i := range ptsRows {
		k := i * 37 % 101
		p.x = append(p.x, float64(k)/10)
		p.y = append(p.y, float64(i*13%17))
		p.color = append(p.color, colors[i%3])
		p.label = append(p.label, map[bool]string{true: "yes", false: "no"}[k > 50])
		p.value = append(p.value, float64(k)*0.5+float64(i%3))
		p.w = append(p.w, float64(1+i%4))
	}
	return p
}

// trCodes codes strings over their sorted distinct values ("" is missing): the order
// copse documents for VARCHAR levels and classes.
func trCodes(vals []string) ([]int32, []string) {
	var levels []string
	for _, v := range vals {
		if v != "" {
			levels = append(levels, v)
		}
	}
	slices.Sort(levels)
	levels = slices.Compact(levels)
	codes := make([]int32, len(vals))
	for i, v := range vals {
		codes[i] = forest.Missing
		if v != "" {
			k, _ := slices.BinarySearch(levels, v)
			codes[i] = int32(k)
		}
	}
	return codes, levels
}

func pick[T any](s []T, keep []int) []T {
	out := make([]T, len(keep))
	for j, i := range keep {
		out[j] = s[i]
	}
	return out
}

// ptsDataset builds the engine's data set for pts rows keep (features x, y, color).
func ptsDataset(t testing.TB, keep []int, target string) *forest.Dataset {
	t.Helper()
	p := ptsData()
	d := forest.NewDataset(len(keep))
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	switch target {
	case "label":
		c, l := trCodes(pick(p.label, keep))
		must(d.SetClassTarget("label", c, l))
	case "value":
		must(d.SetRegressionTarget("value", pick(p.value, keep)))
	}
	must(d.AddNumeric("x", pick(p.x, keep)))
	must(d.AddNumeric("y", pick(p.y, keep)))
	c, l := trCodes(pick(p.color, keep))
	must(d.AddCategorical("color", c, l))
	return d
}

func allRows(n int) []int {
	keep := make([]int, n)
	for i := range keep {
		keep[i] = i
	}
	return keep
}

func ptsHost(t testing.TB) (*Host, *sql.DB) {
	h := openHost(t)
	trExec(t, h.DB(), ptsTable)
	return h, h.DB()
}

// The result row, in both call forms, and what the catalog keeps: a retrained name
// gets version 2, 'name@1' still names the first, copse_models lists both.
func TestTrainCallForms(t *testing.T) {
	h, db := ptsHost(t)
	// DESCRIBE binds only: it shows the columns and trains nothing.
	var got []string
	for _, r := range trRows(t, db, "DESCRIBE SELECT * FROM copse_train('m', 'pts', target := 'label', exclude := ['l'], trees := 5)") {
		got = append(got, r[0]+" "+r[1])
	}
	want := "model VARCHAR, version BIGINT, method VARCHAR, task VARCHAR, target VARCHAR, rows BIGINT, rows_skipped BIGINT, " +
		"features BIGINT, trees BIGINT, oob_metric VARCHAR, oob_value DOUBLE, seconds DOUBLE"
	if strings.Join(got, ", ") != want {
		t.Errorf("columns\n got %s\nwant %s", strings.Join(got, ", "), want)
	}

	r := trRows(t, db, "SELECT model, version, method, task, target, rows, rows_skipped, features, trees, oob_metric, oob_value >= 0, seconds >= 0 FROM copse_train('m', 'pts', target := 'label', exclude := ['l', 'id', 'w', 'value'], trees := 5)")
	if g := strings.Join(r[0], " "); len(r) != 1 || g != "m 1 forest classification label 300 0 3 5 error true true" {
		t.Errorf("SELECT form: %v", r)
	}
	r = trRows(t, db, "CALL copse_train('m', 'pts', target := 'value', method := 'tree', exclude := ['l', 'id', 'w', 'label'], max_depth := 3)")
	if g := strings.Join(r[0][:11], " "); len(r) != 1 || g != "m 2 tree regression value 300 0 3 1 NULL NULL" {
		t.Errorf("CALL form: %v", r)
	}
	if _, e := trModel(t, h, "m"); e.Version != 2 || e.Task != "regression" {
		t.Errorf("'m' resolves to version %d (%s), want 2 (regression)", e.Version, e.Task)
	}
	m1, e1 := trModel(t, h, "m@1")
	if e1.Version != 1 || m1.Task != forest.Classification || len(m1.Trees) != 5 {
		t.Errorf("'m@1': version %d task %s trees %d", e1.Version, m1.Task, len(m1.Trees))
	}
	trSameModel(t, h, "m@1", ptsDataset(t, allRows(ptsRows), "label"), func() forest.Params {
		p := forest.DefaultParams(forest.MethodForest)
		p.Trees = 5
		return p
	}())
	trSameModel(t, h, "m@2", ptsDataset(t, allRows(ptsRows), "value"), func() forest.Params {
		p := forest.DefaultParams(forest.MethodTree)
		p.MaxDepth = 3
		return p
	}())

	list := trRows(t, db, "SELECT name, version, method, task, target, rows, features, trees, oob_metric, created_at IS NOT NULL, size_bytes > 0, source FROM copse_models()")
	wantList := [][]string{
		{"m", "1", "forest", "classification", "label", "300", "3", "5", "error", "true", "true", "pts"},
		{"m", "2", "tree", "regression", "value", "300", "3", "1", "NULL", "true", "true", "pts"},
	}
	if !slices.EqualFunc(list, wantList, slices.Equal) {
		t.Errorf("copse_models:\n got %v\nwant %v", list, wantList)
	}
	got = got[:0]
	for _, r := range trRows(t, db, "DESCRIBE SELECT * FROM copse_models()") {
		got = append(got, r[0]+" "+r[1])
	}
	want = "name VARCHAR, version BIGINT, method VARCHAR, task VARCHAR, target VARCHAR, rows BIGINT, features BIGINT, trees BIGINT, " +
		"oob_metric VARCHAR, oob_value DOUBLE, created_at TIMESTAMP, size_bytes BIGINT, source VARCHAR"
	if strings.Join(got, ", ") != want {
		t.Errorf("copse_models columns\n got %s\nwant %s", strings.Join(got, ", "), want)
	}
}

// Bind has no side effects: EXPLAIN, DESCRIBE and prepare train nothing; each execution
// of a prepared statement trains once; a statement that binds twice (now()) or writes
// its result trains once.
func TestTrainBindTrainsNothing(t *testing.T) {
	h, db := ptsHost(t)
	call := "copse_train('m', 'pts', target := 'label', exclude := ['l'], trees := 3)"
	for _, q := range []string{"EXPLAIN SELECT * FROM " + call, "DESCRIBE SELECT * FROM " + call, "EXPLAIN CALL " + call} {
		trRows(t, db, q)
	}
	st, err := db.Prepare("SELECT version FROM " + call)
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	if n := len(trRows(t, db, "SELECT * FROM copse_models()")); n != 0 || h.jobs.next != 0 {
		t.Fatalf("after EXPLAIN, DESCRIBE and prepare: %d models, %d jobs started; want none", n, h.jobs.next)
	}
	for want := 1; want <= 2; want++ {
		var v int
		if err := st.QueryRow().Scan(&v); err != nil || v != want {
			t.Fatalf("prepared run %d: version %d, %v", want, v, err)
		}
	}
	trRows(t, db, "SELECT *, now() FROM "+call)
	trExec(t, db, "CREATE TABLE result AS SELECT * FROM "+call)
	if r := trRows(t, db, "SELECT max(version), count(*) FROM copse_models()"); r[0][0] != "4" || r[0][1] != "4" {
		t.Errorf("after two prepared runs, a now() query and a CTAS: %v, want 4 versions", r)
	}
}

// Every bad input is an error that names what is wrong, and the catalog stays exactly
// as it was.
func TestTrainBadInput(t *testing.T) {
	h, db := ptsHost(t)
	trExec(t, db, "CREATE TABLE typed AS SELECT id, x, color, label, 'x'::BLOB AS b, {'a': 1} AS s FROM pts")
	trRows(t, db, "CALL copse_train('kept', 'pts', target := 'label', exclude := ['l'], trees := 2)")
	trRows(t, db, "CALL copse_train('kept', 'pts', target := 'value', exclude := ['l'], trees := 2)")
	ok := "target := 'label', exclude := ['l']"
	for _, tc := range []struct {
		q    string
		want []string
	}{
		// Models.
		{"CALL copse_drop('nope')", []string{`"nope"`, "not found"}},
		{"CALL copse_drop('kept@9')", []string{`"kept@9"`, "not found"}},
		{"CALL copse_drop('kept@x')", []string{`kept@x`, "version"}},
		{"CALL copse_drop('')", []string{"empty"}},
		{"CALL copse_train('a@b', 'pts', " + ok + ")", []string{`"a@b"`, "'@'"}},
		{"CALL copse_train('', 'pts', " + ok + ")", []string{"model name is empty"}},
		{"CALL copse_train(NULL, 'pts', " + ok + ")", []string{"model name is NULL"}},
		// Sources.
		{"CALL copse_train('m', '', " + ok + ")", []string{"source is empty"}},
		{"CALL copse_train('m', NULL, " + ok + ")", []string{"source is NULL"}},
		{"CALL copse_train('m', 'SELEC * FROM pts', " + ok + ")", []string{`"SELEC * FROM pts"`, "table or view name"}},
		{"CALL copse_train('m', 'SELECT * FRM pts', " + ok + ")", []string{`"SELECT * FRM pts"`, "syntax error"}},
		{"CALL copse_train('m', 'no_such_table', " + ok + ")", []string{`"no_such_table"`, "does not exist", "TEMP tables", "table or view"}},
		{"CALL copse_train('m', 'read_csv(''no/such/file.csv'')', " + ok + ")", []string{"no/such/file.csv"}},
		{"CALL copse_train('m', 'SELECT 1 AS label, 2 AS x; DROP TABLE pts', " + ok + ")", []string{"DROP TABLE pts"}},
		{"CALL copse_train('m', 'SELECT * EXCLUDE (l), CASE WHEN id = 250 THEN error(''boom at row 250'') ELSE 1 END AS z FROM pts', target := 'label')",
			[]string{"boom at row 250"}},
		// Target.
		{"CALL copse_train('m', 'pts', exclude := ['l'])", []string{"target := 'column' is required"}},
		{"CALL copse_train('m', 'pts', target := 'nope', exclude := ['l'])", []string{`target "nope"`, "no such column", `"label"`}},
		{"CALL copse_train('m', 'SELECT x, NULL::VARCHAR AS t FROM pts', target := 't')", []string{`target "t"`, "NULL in every one of the 300 rows"}},
		{"CALL copse_train('m', 'SELECT x, ''same'' AS t FROM pts', target := 't')", []string{`target "t"`, "single class", `"same"`}},
		{"CALL copse_train('m', 'SELECT x, label FROM pts WHERE x > 100', target := 'label')", []string{"returned no rows"}},
		{"CALL copse_train('m', 'pts', target := 'l')", []string{`target "l"`, "BIGINT[]"}},
		{"CALL copse_train('m', 'pts', target := 'color', task := 'regression', exclude := ['l'])", []string{`target "color"`, "regression needs a numeric target"}},
		// Column types.
		{"CALL copse_train('m', 'pts', target := 'label')", []string{`column "l"`, "BIGINT[]", "exclude := ['l']"}},
		{"CALL copse_train('m', 'typed', target := 'label')", []string{`column "b"`, "BLOB"}},
		{"CALL copse_train('m', 'typed', target := 'label', exclude := ['b'])", []string{`column "s"`, "STRUCT"}},
		// Options.
		{"CALL copse_train('m', 'pts', " + ok + ", trees := 0)", []string{"trees 0"}},
		{"CALL copse_train('m', 'pts', " + ok + ", trees := -3)", []string{"trees -3"}},
		{"CALL copse_train('m', 'pts', " + ok + ", trees := 2.5)", []string{"trees 2.5", "whole number"}},
		{"CALL copse_train('m', 'pts', " + ok + ", method := 'tree', trees := 5)", []string{"trees 5", "tree"}},
		{"CALL copse_train('m', 'pts', " + ok + ", features_per_split := 7)", []string{"features_per_split 7", "6 feature columns"}},
		{"CALL copse_train('m', 'pts', " + ok + ", features_per_split := -1)", []string{"features_per_split -1"}},
		{"CALL copse_train('m', 'pts', " + ok + ", method := 'bagging', features_per_split := 2)", []string{"features_per_split", "'bagging'"}},
		{"CALL copse_train('m', 'pts', " + ok + ", row_fraction := 0)", []string{"row_fraction 0", "(0, 1]"}},
		{"CALL copse_train('m', 'pts', " + ok + ", row_fraction := 1.5)", []string{"row_fraction 1.5", "(0, 1]"}},
		{"CALL copse_train('m', 'pts', " + ok + ", method := 'tree', row_fraction := 0.5)", []string{"row_fraction", "'tree'"}},
		{"CALL copse_train('m', 'pts', " + ok + ", bins := 1)", []string{"bins 1", "65535"}},
		{"CALL copse_train('m', 'pts', " + ok + ", bins := 65536)", []string{"bins 65536", "65535"}},
		{"CALL copse_train('m', 'pts', " + ok + ", min_leaf := 0)", []string{"min_leaf 0"}},
		{"CALL copse_train('m', 'pts', " + ok + ", max_depth := -1)", []string{"max_depth -1"}},
		{"CALL copse_train('m', 'pts', " + ok + ", min_gain := -0.5)", []string{"min_gain -0.5"}},
		{"CALL copse_train('m', 'pts', " + ok + ", threads := -1)", []string{"threads -1"}},
		{"CALL copse_train('m', 'pts', " + ok + ", seed := -1)", []string{"seed -1"}},
		{"CALL copse_train('m', 'pts', " + ok + ", seed := 1.5)", []string{"seed 1.5"}},
		{"CALL copse_train('m', 'pts', " + ok + ", method := 'boost')", []string{`method "boost"`, "'forest'"}},
		{"CALL copse_train('m', 'pts', " + ok + ", task := 'ranking')", []string{`task "ranking"`}},
		{"CALL copse_train('m', 'pts', " + ok + ", impurity := 'log')", []string{`impurity "log"`}},
		{"CALL copse_train('m', 'pts', target := 'value', exclude := ['l'], impurity := 'entropy')", []string{"impurity", `target "value"`, "regression"}},
		{"CALL copse_train('m', 'pts', " + ok + ", tres := 5)", []string{`"tres"`}},
		{"CALL copse_train('m', 'pts', " + ok + ", trees := 'many')", []string{"many"}},
		// Roles.
		{"CALL copse_train('m', 'pts', " + ok + ", weight := 'nope')", []string{`weight "nope"`, "no such column"}},
		{"CALL copse_train('m', 'pts', " + ok + ", weight := 'color')", []string{`weight "color"`, "VARCHAR", "numeric"}},
		{"CALL copse_train('m', 'SELECT *, x - 5 AS wneg FROM pts', " + ok + ", weight := 'wneg')", []string{`weight "wneg"`, "-5 in row 1", "≥ 0"}},
		{"CALL copse_train('m', 'SELECT *, NULLIF(id, 7) AS wnull FROM pts', " + ok + ", weight := 'wnull')", []string{`weight "wnull"`, "NULL in row 8"}},
		{"CALL copse_train('m', 'pts', " + ok + ", weight := 'label')", []string{`weight "label"`, "target"}},
		{"CALL copse_train('m', 'pts', " + ok + ", weight := 'w', key := 'W')", []string{"weight and key", `"w"`}},
		{"CALL copse_train('m', 'pts', " + ok + ", key := 'nope')", []string{`key "nope"`, "no such column"}},
		{"CALL copse_train('m', 'pts', target := 'label', exclude := ['l', 'nope'])", []string{`exclude "nope"`, "no such column"}},
		{"CALL copse_train('m', 'pts', target := 'label', exclude := ['l', 'LABEL'])", []string{"exclude", "target"}},
		{"CALL copse_train('m', 'SELECT label, x FROM pts', target := 'label', exclude := ['x'])", []string{"no feature columns"}},
		{"CALL copse_train('m', 'pts', " + ok + ", positive := 'maybe')", []string{`"maybe"`, `"no", "yes"`}},
		{"CALL copse_train('m', 'pts', target := 'value', exclude := ['l'], positive := 'yes')", []string{"positive", `target "value"`, "regression"}},
		{"CALL copse_train('m', 'pts', target := 'color', exclude := ['l'], positive := 'red')", []string{`positive "red"`, "3 classes"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
	if r := trRows(t, db, "SELECT count(*) FROM pts"); r[0][0] != "300" {
		t.Errorf("pts after the bad sources: %v rows", r)
	}
	if jobs := h.Jobs(); len(jobs) != 0 {
		t.Errorf("jobs left behind: %+v", jobs)
	}
}

// The source must be committed data on a table or view: a TEMP table or an uncommitted
// one is invisible to copse's own connection, and the error says so.
func TestTrainTempTable(t *testing.T) {
	_, db := ptsHost(t)
	ctx := context.Background()
	conn, err := db.Conn(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	if _, err := conn.ExecContext(ctx, "CREATE TEMP TABLE tmp AS SELECT * EXCLUDE (l) FROM pts"); err != nil {
		t.Fatal(err)
	}
	before := trCatalog(t, db)
	_, err = trQuery(conn, "CALL copse_train('m', 'tmp', target := 'label')")
	if err == nil || !strings.Contains(err.Error(), `"tmp"`) || !strings.Contains(err.Error(), "TEMP tables") {
		t.Errorf("TEMP table: %v", err)
	}
	if _, err := conn.ExecContext(ctx, "BEGIN; CREATE TABLE fresh AS SELECT * EXCLUDE (l) FROM pts"); err != nil {
		t.Fatal(err)
	}
	_, err = trQuery(conn, "CALL copse_train('m', 'fresh', target := 'label')")
	if err == nil || !strings.Contains(err.Error(), `"fresh"`) || !strings.Contains(err.Error(), "committed") {
		t.Errorf("uncommitted table: %v", err)
	}
	if _, err := conn.ExecContext(ctx, "ROLLBACK"); err != nil {
		t.Fatal(err)
	}
	if after := trCatalog(t, db); after != before {
		t.Errorf("catalog changed:\n%s\n%s", before, after)
	}
}

func TestTrainSourceQuery(t *testing.T) {
	for _, tc := range []struct{ in, want string }{
		{"pts", `SELECT * FROM "pts"`},
		{"  main.pts ", `SELECT * FROM "main"."pts"`},
		{`"odd ""name"""`, `SELECT * FROM "odd ""name"""`},
		{`db."Schema".t$1`, `SELECT * FROM "db"."Schema"."t$1"`},
		{"read_parquet('x/*.parquet')", "SELECT * FROM read_parquet('x/*.parquet')\n"},
		{"read_csv('a.csv', header = true)", "SELECT * FROM read_csv('a.csv', header = true)\n"},
		{"SELECT * FROM t -- note", "SELECT * FROM (\nSELECT * FROM t -- note\n) AS copse_source"},
		{"select 1;", "SELECT * FROM (\nselect 1\n) AS copse_source"},
		{"WITH a AS (SELECT 1) SELECT * FROM a", "SELECT * FROM (\nWITH a AS (SELECT 1) SELECT * FROM a\n) AS copse_source"},
		{"FROM t", "SELECT * FROM (\nFROM t\n) AS copse_source"},
		{"VALUES (1, 2)", "SELECT * FROM (\nVALUES (1, 2)\n) AS copse_source"},
		{"(SELECT 1)", "SELECT * FROM (\n(SELECT 1)\n) AS copse_source"},
		{"-- c\nSELECT 1", "SELECT * FROM (\n-- c\nSELECT 1\n) AS copse_source"},
	} {
		got, err := sourceQuery(tc.in)
		if err != nil || got != tc.want {
			t.Errorf("sourceQuery(%q) = %q, %v; want %q", tc.in, got, err, tc.want)
		}
	}
	for _, bad := range []string{"", "  ", "my table", "t; DROP TABLE x", "1abc", `"unclosed`, `""`, "f(x) junk", "a.", "selec * from t",
		"range(3); DROP TABLE x; SELECT (1)", "SELECT 1) AS a; DROP TABLE x; SELECT * FROM (SELECT 1"} {
		if got, err := sourceQuery(bad); err == nil {
			t.Errorf("sourceQuery(%q) = %q, want an error", bad, got)
		}
	}
}

// Every source form reaches the same rows.
func TestTrainSourceForms(t *testing.T) {
	h, db := ptsHost(t)
	trExec(t, db, `CREATE SCHEMA s; CREATE TABLE s."odd ""t""" AS SELECT * FROM pts; CREATE VIEW v AS SELECT * FROM pts`)
	dir := t.TempDir()
	file := filepath.Join(dir, "pts.parquet")
	trExec(t, db, "COPY (SELECT * EXCLUDE (l) FROM pts) TO '"+file+"' (FORMAT parquet)")
	p := forest.DefaultParams(forest.MethodForest)
	p.Trees = 3
	d := ptsDataset(t, allRows(ptsRows), "label")
	const withL, withoutL = "'l', 'id', 'w', 'value'", "'id', 'w', 'value'"
	for i, tc := range []struct{ src, exclude string }{
		{"v", withL},
		{`s."odd ""t"""`, withL},
		{"S.\"ODD \"\"T\"\"\"", withL},
		{"read_parquet('" + file + "')", withoutL}, // written without l
		{"SELECT * FROM pts -- all of it", withL},
		{"FROM pts SELECT *;", withL},
		{"WITH a AS (SELECT * FROM pts) SELECT * FROM a", withL},
		{"(SELECT * EXCLUDE (l) FROM pts)", withoutL},
	} {
		src := tc.src
		q := "CALL copse_train('f" + strconv.Itoa(i) + "', '" + strings.ReplaceAll(src, "'", "''") + "', target := 'label', exclude := [" + tc.exclude + "], trees := 3)"
		if _, err := trQuery(db, q); err != nil {
			t.Errorf("%s: %v", src, err)
			continue
		}
		trSameModel(t, h, "f"+strconv.Itoa(i), d, p)
		if _, e := trModel(t, h, "f"+strconv.Itoa(i)); e.Source != strings.TrimSpace(src) {
			t.Errorf("source stored as %q, want %q", e.Source, src)
		}
	}
}

// A model name holding quotes and SQL is stored, listed, loaded and dropped as it is.
func TestTrainModelNameIsData(t *testing.T) {
	h, db := ptsHost(t)
	name := `x'); DROP TABLE copse.models; --"`
	q := "CALL copse_train('" + strings.ReplaceAll(name, "'", "''") + "', 'pts', target := 'label', exclude := ['l'], trees := 2)"
	if r := trRows(t, db, q); r[0][0] != name {
		t.Fatalf("model %q", r[0][0])
	}
	if r := trRows(t, db, "SELECT name FROM copse_models()"); len(r) != 1 || r[0][0] != name {
		t.Fatalf("copse_models: %v", r)
	}
	if _, e := trModel(t, h, name+"@1"); e.Name != name {
		t.Fatalf("loaded %q", e.Name)
	}
	if r := trRows(t, db, "CALL copse_drop('"+strings.ReplaceAll(name, "'", "''")+"')"); r[0][1] != "1" {
		t.Fatalf("drop: %v", r)
	}
}

func TestTrainDrop(t *testing.T) {
	h, db := ptsHost(t)
	for range 3 {
		trRows(t, db, "CALL copse_train('m', 'pts', target := 'label', exclude := ['l'], trees := 2)")
	}
	trRows(t, db, "CALL copse_train('other', 'pts', target := 'label', exclude := ['l'], trees := 2)")
	trModel(t, h, "m@2") // cached
	if r := trRows(t, db, "SELECT * FROM copse_drop('m@2')"); !slices.Equal(r[0], []string{"m@2", "1"}) {
		t.Errorf("drop m@2: %v", r)
	}
	if _, _, err := h.loadModel(context.Background(), "m@2"); !errors.Is(err, ErrNoModel) {
		t.Errorf("m@2 after its drop: %v", err)
	}
	if _, e := trModel(t, h, "m"); e.Version != 3 {
		t.Errorf("latest m is version %d", e.Version)
	}
	if r := trRows(t, db, "CALL copse_drop('m')"); !slices.Equal(r[0], []string{"m", "2"}) {
		t.Errorf("drop m: %v", r)
	}
	if r := trRows(t, db, "SELECT name, version FROM copse_models()"); len(r) != 1 || r[0][0] != "other" {
		t.Errorf("left: %v", r)
	}
	// Version numbers are never reused: after versions 1–3 are gone the next is 4, so an
	// old reference 'm@1' cannot silently name a new model.
	if r := trRows(t, db, "CALL copse_train('m', 'pts', target := 'label', exclude := ['l'], trees := 2)"); r[0][1] != "4" {
		t.Errorf("retrained after drop: version %s, want 4", r[0][1])
	}
	if _, _, err := h.loadModel(context.Background(), "m@1"); !errors.Is(err, ErrNoModel) {
		t.Errorf("m@1 after every version was dropped and m retrained: %v", err)
	}
	// Dropping the latest version does not hand its number out again either.
	trRows(t, db, "CALL copse_drop('m@4')")
	if r := trRows(t, db, "CALL copse_train('m', 'pts', target := 'label', exclude := ['l'], trees := 2)"); r[0][1] != "5" {
		t.Errorf("retrained after dropping the latest: version %s, want 5", r[0][1])
	}
	// EXPLAIN drops nothing.
	trRows(t, db, "EXPLAIN SELECT * FROM copse_drop('other')")
	if r := trRows(t, db, "SELECT count(*) FROM copse_models() WHERE name = 'other'"); r[0][0] != "1" {
		t.Errorf("EXPLAIN dropped the model")
	}
}

// Rows with a NULL target are left out and counted; the model is the engine's on the
// remaining rows. A VARCHAR level that only NULL-target rows carry is not kept.
func TestTrainRowsSkipped(t *testing.T) {
	h, db := ptsHost(t)
	src := `SELECT * EXCLUDE (l, id, w, value) REPLACE (
		CASE WHEN id % 5 = 0 THEN NULL ELSE label END AS label,
		CASE WHEN id = 0 THEN 'only-in-a-skipped-row' ELSE color END AS color) FROM pts`
	r := trRows(t, db, "SELECT rows, rows_skipped FROM copse_train('m', '"+strings.ReplaceAll(src, "'", "''")+"', target := 'label', trees := 4)")
	if !slices.Equal(r[0], []string{"240", "60"}) {
		t.Fatalf("rows, rows_skipped = %v, want 240, 60", r[0])
	}
	var keep []int
	for i := range ptsRows {
		if i%5 != 0 {
			keep = append(keep, i)
		}
	}
	p := forest.DefaultParams(forest.MethodForest)
	p.Trees = 4
	trSameModel(t, h, "m", ptsDataset(t, keep, "label"), p)

	r = trRows(t, db, "SELECT rows, rows_skipped FROM copse_train('r', 'SELECT x, y, color, NULLIF(value, 0) AS value FROM pts', target := 'value', trees := 2)")
	zero := 0
	for _, v := range ptsData().value {
		if v == 0 {
			zero++
		}
	}
	if zero == 0 || !slices.Equal(r[0], []string{strconv.Itoa(ptsRows - zero), strconv.Itoa(zero)}) {
		t.Errorf("regression: rows, rows_skipped = %v, want %d, %d", r[0], ptsRows-zero, zero)
	}
}

// exclude drops columns (matched as SQL matches names, ignoring case), including ones
// of a type copse cannot use.
func TestTrainExclude(t *testing.T) {
	h, db := ptsHost(t)
	r := trRows(t, db, "SELECT features FROM copse_train('m', 'pts', target := 'label', exclude := ['L', 'Id', 'w', 'value', 'y'], trees := 2)")
	if r[0][0] != "2" {
		t.Errorf("features %s, want 2", r[0][0])
	}
	m, _ := trModel(t, h, "m")
	if got := featureNames(m); !slices.Equal(got, []string{"x", "color"}) {
		t.Errorf("features %v, want x, color", got)
	}
}

func featureNames(m *forest.Model) []string {
	var out []string
	for _, f := range m.Features {
		out = append(out, f.Name)
	}
	return out
}

// A weight column weights rows exactly as the engine's weights do, and is not a feature.
func TestTrainWeight(t *testing.T) {
	h, db := ptsHost(t)
	for _, method := range []string{"tree", "forest"} {
		name := "w_" + method
		trRows(t, db, "CALL copse_train('"+name+"', 'pts', target := 'label', weight := 'w', method := '"+method+"', exclude := ['l', 'id', 'value'], trees := "+map[string]string{"tree": "1", "forest": "4"}[method]+")")
		d := ptsDataset(t, allRows(ptsRows), "label")
		if err := d.SetWeights(ptsData().w); err != nil {
			t.Fatal(err)
		}
		p := forest.DefaultParams(forest.Method(method))
		if method == "forest" {
			p.Trees = 4
		}
		trSameModel(t, h, name, d, p)
	}
	// The weights matter: the unweighted tree differs.
	trRows(t, db, "CALL copse_train('plain', 'pts', target := 'label', method := 'tree', exclude := ['l', 'id', 'value', 'w'])")
	a, _ := trModel(t, h, "plain")
	b, _ := trModel(t, h, "w_tree")
	if a.Trees[0].Cover[0] == b.Trees[0].Cover[0] {
		t.Errorf("root cover %v with and without weights", a.Trees[0].Cover[0])
	}
}

// The key column's values are kept as text for the rows trained on (NULL-target rows
// left out), in order, and the key is not a feature.
func TestTrainKey(t *testing.T) {
	h, db := ptsHost(t)
	src := `SELECT * EXCLUDE (l) REPLACE (CASE WHEN id % 4 = 1 THEN NULL ELSE label END AS label),
		DATE '2024-02-27' + id::INTEGER AS day FROM pts`
	for _, tc := range []struct {
		key  string
		want func(i int) string
	}{
		{"id", strconv.Itoa},
		{"day", func(i int) string { return time.Date(2024, 2, 27+i, 0, 0, 0, 0, time.UTC).Format("2006-01-02") }},
	} {
		q := "CALL copse_train('k_" + tc.key + "', '" + strings.ReplaceAll(src, "'", "''") + "', target := 'label', key := '" + tc.key + "', exclude := ['day', 'id'], trees := 2)"
		r := trRows(t, db, q)
		if r[0][5] != "225" || r[0][7] != "5" {
			t.Fatalf("key %s: rows %s features %s, want 225 and 5 (x, y, color, value, w)", tc.key, r[0][5], r[0][7])
		}
		m, e := trModel(t, h, "k_"+tc.key)
		if slices.Contains(featureNames(m), tc.key) {
			t.Errorf("key %s is a feature: %v", tc.key, featureNames(m))
		}
		keys, err := h.rowKeys(context.Background(), e)
		if err != nil {
			t.Fatal(err)
		}
		var want []string
		for i := range ptsRows {
			if i%4 != 1 {
				want = append(want, tc.want(i))
			}
		}
		if !slices.Equal(keys, want) {
			t.Errorf("key %s: %d keys, first %q; want %d, first %q", tc.key, len(keys), keys[:min(3, len(keys))], len(want), want[:3])
		}
	}
	// Without a key, no keys are stored.
	trRows(t, db, "CALL copse_train('nokey', 'pts', target := 'label', exclude := ['l'], trees := 2)")
	_, e := trModel(t, h, "nokey")
	if keys, err := h.rowKeys(context.Background(), e); err != nil || keys != nil {
		t.Errorf("no key column: keys %v, %v", keys, err)
	}
}

// Classes are sorted (numbers numerically, false before true, ENUM values in the
// enum's order) and the second of two is positive unless positive := names the other.
func TestTrainPositive(t *testing.T) {
	h, db := ptsHost(t)
	trExec(t, db, "CREATE TYPE grade AS ENUM ('zeta', 'alpha', 'unused')")
	trExec(t, db, `CREATE TABLE cls AS SELECT x, y,
		label, (x > 5)::INTEGER * 10 AS n, x > 5 AS b, (CASE WHEN x > 5 THEN 'alpha' ELSE 'zeta' END)::grade AS e,
		CASE WHEN x > 5 THEN 2.5 ELSE -1 END::DOUBLE AS d FROM pts`)
	for _, tc := range []struct {
		target, opts string
		want         []string
		high         string // the class of rows with x > 5
	}{
		{"label", "", []string{"no", "yes"}, "yes"},
		{"label", ", positive := 'no'", []string{"yes", "no"}, "yes"},
		{"n", ", task := 'classification'", []string{"0", "10"}, "10"},
		{"n", ", task := 'classification', positive := 0", []string{"10", "0"}, "10"},
		{"n", ", task := 'classification', positive := '10.0'", []string{"0", "10"}, "10"},
		{"d", ", task := 'classification'", []string{"-1", "2.5"}, "2.5"},
		{"b", "", []string{"false", "true"}, "true"},
		{"b", ", positive := false", []string{"true", "false"}, "true"},
		{"e", "", []string{"zeta", "alpha"}, "alpha"},
		{"e", ", positive := 'zeta'", []string{"alpha", "zeta"}, "alpha"},
	} {
		ex := []string{"'label'", "'n'", "'b'", "'e'", "'d'"}
		ex = slices.DeleteFunc(ex, func(s string) bool { return s == "'"+tc.target+"'" })
		q := "CALL copse_train('p', 'cls', target := '" + tc.target + "', exclude := [" + strings.Join(ex, ", ") + "], trees := 2" + tc.opts + ")"
		if _, err := trQuery(db, q); err != nil {
			t.Errorf("%s: %v", q, err)
			continue
		}
		m, _ := trModel(t, h, "p")
		if !slices.Equal(m.Classes, tc.want) {
			t.Errorf("%s: classes %q, want %q", q, m.Classes, tc.want)
		}
		// The labels travel with their rows: a row far on the high side gets the high class.
		if !slices.Equal(featureNames(m), []string{"x", "y"}) {
			t.Fatalf("features %v", featureNames(m))
		}
		pred := m.PredictRow([]float64{9.5, 3}, make([]float64, m.Width()))
		if got := m.Classes[forest.Class(pred)]; got != tc.high {
			t.Errorf("%s: x = 9.5 predicted %q, want %q", q, got, tc.high)
		}
	}
	// A numeric target regresses unless the task says otherwise.
	trRows(t, db, "CALL copse_train('p', 'cls', target := 'n', exclude := ['label', 'b', 'e', 'd'], trees := 2)")
	if m, _ := trModel(t, h, "p"); m.Task != forest.Regression {
		t.Errorf("numeric target: task %s", m.Task)
	}
}

// DATE (days), TIMESTAMP (seconds), BOOLEAN (0/1) and DECIMAL columns are numeric; ENUM
// columns keep the enum's levels in its order; VARCHAR levels are sorted. The model
// equals the engine's on values computed here in Go.
func TestTrainColumnTypes(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TYPE mood AS ENUM ('sad', 'ok', 'happy', 'ecstatic')")
	const n = 240
	trExec(t, db, `CREATE TABLE typed AS SELECT
		DATE '2020-01-01' + (i % 50)::INTEGER AS d,
		TIMESTAMP '2020-01-01 00:00:00' + to_minutes(i * 7 % 97) AS ts,
		i % 3 = 0 AS b,
		((i * 29 % 83)::DECIMAL(9,2) / 4)::DECIMAL(9,2) AS dec,
		(['happy', 'sad', 'ok'][i % 3 + 1])::mood AS e,
		['pear', 'apple', 'fig', NULL][i % 4 + 1] AS s,
		(i % 50)::DOUBLE * 0.25 + (i * 7 % 97)::DOUBLE / 8 + (i * 29 % 83)::DOUBLE / 4 AS target,
		i % 50 > 20 AS flag
	FROM range(`+strconv.Itoa(n)+`) r(i)`)
	day0 := float64(time.Date(2020, 1, 1, 0, 0, 0, 0, time.UTC).Unix() / 86400)
	sec0 := float64(time.Date(2020, 1, 1, 0, 0, 0, 0, time.UTC).Unix())
	var d, ts, b, dec, target []float64
	var e []int32
	var s []string
	var flag []int32
	for i := range n {
		d = append(d, day0+float64(i%50))
		ts = append(ts, sec0+float64(i*7%97*60))
		b = append(b, map[bool]float64{true: 1}[i%3 == 0])
		dec = append(dec, float64(i*29%83)/4)
		e = append(e, []int32{2, 0, 1}[i%3])
		s = append(s, []string{"pear", "apple", "fig", ""}[i%4])
		target = append(target, float64(i%50)*0.25+float64(i*7%97)/8+float64(i*29%83)/4)
		flag = append(flag, map[bool]int32{true: 1}[i%50 > 20])
	}
	features := func(t *testing.T, ds *forest.Dataset) {
		for _, err := range []error{
			ds.AddNumeric("d", d), ds.AddNumeric("ts", ts), ds.AddNumeric("b", b), ds.AddNumeric("dec", dec),
			ds.AddCategorical("e", e, []string{"sad", "ok", "happy", "ecstatic"}),
			func() error { c, l := trCodes(s); return ds.AddCategorical("s", c, l) }(),
		} {
			if err != nil {
				t.Fatal(err)
			}
		}
	}
	t.Run("regression", func(t *testing.T) {
		trRows(t, db, "CALL copse_train('reg', 'typed', target := 'target', exclude := ['flag'], trees := 3, seed := 7)")
		ds := forest.NewDataset(n)
		if err := ds.SetRegressionTarget("target", target); err != nil {
			t.Fatal(err)
		}
		features(t, ds)
		p := forest.DefaultParams(forest.MethodForest)
		p.Trees, p.Seed = 3, 7
		trSameModel(t, h, "reg", ds, p)
	})
	t.Run("boolean target", func(t *testing.T) {
		trRows(t, db, "CALL copse_train('cls', 'typed', target := 'flag', exclude := ['target'], method := 'bagging', trees := 3, impurity := 'entropy')")
		ds := forest.NewDataset(n)
		if err := ds.SetClassTarget("flag", flag, []string{"false", "true"}); err != nil {
			t.Fatal(err)
		}
		features(t, ds)
		p := forest.DefaultParams(forest.MethodBagging)
		p.Trees, p.Impurity = 3, forest.Entropy
		trSameModel(t, h, "cls", ds, p)
	})
}

// trCSV reads a CSV file of the shared test data in Go, independently of DuckDB: every
// column but target is numeric (strconv.ParseFloat), target holds class names.
func trCSV(t testing.TB, file, target string) *forest.Dataset {
	t.Helper()
	return csvDataset(t, filepath.Join("..", "testdata", file), target, true)
}

// csvDataset reads a CSV file in Go, independently of DuckDB: every column but target is
// numeric (strconv.ParseFloat); target holds class names when classes is set, else
// numbers for regression.
func csvDataset(t testing.TB, path, target string, classes bool) *forest.Dataset {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	d := forest.NewDataset(len(recs) - 1)
	for j, name := range recs[0] {
		if name == target && classes {
			var labels []string
			for _, r := range recs[1:] {
				labels = append(labels, r[j])
			}
			c, l := trCodes(labels)
			if err := d.SetClassTarget(name, c, l); err != nil {
				t.Fatal(err)
			}
			continue
		}
		vals := make([]float64, len(recs)-1)
		for i, r := range recs[1:] {
			if vals[i], err = strconv.ParseFloat(r[j], 64); err != nil {
				t.Fatalf("%s row %d column %s: %v", path, i+1, name, err)
			}
		}
		if name == target {
			err = d.SetRegressionTarget(name, vals)
		} else {
			err = d.AddNumeric(name, vals)
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	return d
}

// End to end on open data: training from SQL on a CSV that DuckDB reads gives the very
// model the engine gives on the same file read in Go, and the forest's out-of-bag error
// on the Wisconsin breast cancer data is within 1.5 points of the reference library's
// (testdata/reference/reference.json "breast_cancer_forest_oob": scikit-learn 1.2.1,
// RandomForestClassifier with 200 trees, 5 of 30 features per split, bootstrap, mean
// over random_state 1–5; see testdata/README.md).
func TestTrainMatchesEngine(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	t.Run("iris", func(t *testing.T) {
		for _, method := range []forest.Method{forest.MethodTree, forest.MethodForest} {
			name := "iris_" + string(method)
			trRows(t, db, "CALL copse_train('"+name+"', 'read_csv(''../testdata/iris.csv'')', target := 'species', method := '"+string(method)+"', seed := 42)")
			p := forest.DefaultParams(method)
			p.Seed = 42
			trSameModel(t, h, name, trCSV(t, "iris.csv", "species"), p)
		}
	})
	t.Run("breast cancer", func(t *testing.T) {
		var ref struct {
			Trees            int     `json:"n_estimators"`
			FeaturesPerSplit int     `json:"features_per_split"`
			Mean             float64 `json:"oob_error_mean"`
		}
		b, err := os.ReadFile(filepath.Join("..", "testdata", "reference", "reference.json"))
		if err != nil {
			t.Fatal(err)
		}
		var all map[string]json.RawMessage
		if err := json.Unmarshal(b, &all); err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal(all["breast_cancer_forest_oob"], &ref); err != nil || ref.Trees != 200 || ref.FeaturesPerSplit != 5 {
			t.Fatalf("reference.json: %+v, %v", ref, err)
		}
		sum := 0.0
		for seed := 1; seed <= 5; seed++ {
			q := "SELECT oob_metric, oob_value, rows, features, task FROM copse_train('bc', 'read_csv(''../testdata/breast_cancer.csv'')', " +
				"target := 'diagnosis', trees := 200, features_per_split := 5, seed := " + strconv.Itoa(seed) + ")"
			r := trRows(t, db, q)
			if r[0][0] != "error" || r[0][2] != "569" || r[0][3] != "30" || r[0][4] != "classification" {
				t.Fatalf("seed %d: %v", seed, r[0])
			}
			v, _ := strconv.ParseFloat(r[0][1], 64)
			t.Logf("seed %d: OOB error %.4f", seed, v)
			sum += v
		}
		const tol = 0.015 // the acceptance bound: 1.5 points of error rate
		mean := sum / 5
		t.Logf("mean OOB error %.4f, reference %.4f", mean, ref.Mean)
		if math.Abs(mean-ref.Mean) > tol {
			t.Errorf("mean OOB error %.4f, reference %.4f: more than %.3f apart", mean, ref.Mean, tol)
		}
		p := forest.DefaultParams(forest.MethodForest)
		p.Trees, p.FeaturesPerSplit, p.Seed = ref.Trees, float64(ref.FeaturesPerSplit), 1
		trSameModel(t, h, "bc@1", trCSV(t, "breast_cancer.csv", "diagnosis"), p)
		if m, _ := trModel(t, h, "bc@1"); !slices.Equal(m.Classes, []string{"benign", "malignant"}) {
			t.Errorf("classes %q: want benign, malignant (malignant positive)", m.Classes)
		}
	})
}

// A training whose attached context is cancelled stops, reports it and saves nothing;
// meanwhile copse_jobs, read on another connection, shows it training.
func TestTrainCancel(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	trExec(t, db, "CREATE TABLE big AS SELECT i, (i * 7919 % 1000)::DOUBLE AS x, (i * 104729 % 997)::DOUBLE AS z, (i * 7919 % 1000)::DOUBLE + (i % 13)::DOUBLE AS y FROM range(3000) r(i)")
	trRows(t, db, "CALL copse_train('kept', 'big', target := 'y', trees := 2)")
	before := trCatalog(t, db)
	ctx := context.Background()

	run := func(t *testing.T, cancelFirst bool) {
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
		if cancelFirst {
			cancel()
		}
		done := make(chan error, 1)
		go func() {
			// Far more trees than can finish while the test watches.
			_, err := trQuery(conn, "CALL copse_train('slow', 'big', target := 'y', trees := 100000)")
			done <- err
		}()
		if !cancelFirst {
			var jobs [][]string
			for len(jobs) == 0 {
				select {
				case err := <-done:
					t.Fatalf("the training ended before it was cancelled: %v", err)
				case <-time.After(10 * time.Millisecond):
				}
				jobs = trRows(t, db, "SELECT model, method, stage, trees FROM copse_jobs() WHERE stage = 'training' AND trees_done > 0")
			}
			if !slices.Equal(jobs[0], []string{"slow", "forest", "training", "100000"}) {
				t.Errorf("copse_jobs: %v", jobs)
			}
			cancel()
		}
		err = <-done
		if err == nil || !strings.Contains(err.Error(), context.Canceled.Error()) || !strings.Contains(err.Error(), `"slow"`) {
			t.Errorf("cancelled training: %v", err)
		}
		if after := trCatalog(t, db); after != before {
			t.Errorf("catalog changed:\n%s\n%s", before, after)
		}
		if j := trRows(t, db, "SELECT * FROM copse_jobs()"); len(j) != 0 {
			t.Errorf("jobs after the cancel: %v", j)
		}
	}
	t.Run("while training", func(t *testing.T) { run(t, false) })
	t.Run("already cancelled", func(t *testing.T) { run(t, true) })
}

// Trainings of one name running at once each get their own version; none is lost.
func TestTrainConcurrentSameName(t *testing.T) {
	_, db := ptsHost(t)
	errs := make(chan error, 4)
	for range 4 {
		go func() {
			_, err := trQuery(db, "CALL copse_train('m', 'pts', target := 'label', exclude := ['l'], trees := 10)")
			errs <- err
		}()
	}
	for range 4 {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
	if r := trRows(t, db, "SELECT string_agg(version::VARCHAR, ',' ORDER BY version) FROM copse_models() WHERE name = 'm'"); r[0][0] != "1,2,3,4" {
		t.Errorf("versions %v, want 1,2,3,4", r[0][0])
	}
}

// Every option reaches the engine: the model equals forest.Train's with the same
// Params, field by field.
func TestTrainOptionsReachEngine(t *testing.T) {
	h, db := ptsHost(t)
	d := ptsDataset(t, allRows(ptsRows), "label")
	const ex = "target := 'label', exclude := ['l', 'id', 'w', 'value']"
	for _, tc := range []struct {
		opts string
		p    func() forest.Params
	}{
		{"method := 'bagging', task := 'classification', trees := 7, max_depth := 4, min_leaf := 2.5, min_gain := 0.001, " +
			"impurity := 'entropy', row_fraction := 0.7, with_replacement := false, bins := 16, seed := 99, threads := 1",
			func() forest.Params {
				p := forest.DefaultParams(forest.MethodBagging)
				p.Task, p.Trees, p.MaxDepth, p.MinLeaf, p.MinGain = forest.Classification, 7, 4, 2.5, 0.001
				p.Impurity, p.RowFraction, p.WithReplacement, p.Bins, p.Seed = forest.Entropy, 0.7, false, 16, 99
				return p
			}},
		{"method := 'FOREST', trees := 6.0, features_per_split := 2, seed := 5, bins := 255",
			func() forest.Params {
				p := forest.DefaultParams(forest.MethodForest)
				p.Trees, p.FeaturesPerSplit, p.Seed = 6, 2, 5
				return p
			}},
		{"trees := 4, features_per_split := 0.5, min_leaf := 3, threads := 2",
			func() forest.Params {
				p := forest.DefaultParams(forest.MethodForest)
				p.Trees, p.FeaturesPerSplit, p.MinLeaf = 4, 0.5, 3
				return p
			}},
		{"method := 'tree', max_depth := 2, impurity := 'gini'",
			func() forest.Params {
				p := forest.DefaultParams(forest.MethodTree)
				p.MaxDepth, p.Impurity = 2, forest.Gini
				return p
			}},
	} {
		if _, err := trQuery(db, "CALL copse_train('o', 'pts', "+ex+", "+tc.opts+")"); err != nil {
			t.Errorf("%s: %v", tc.opts, err)
			continue
		}
		trSameModel(t, h, "o", d, tc.p())
	}
}

// The catalog write commits on copse's own connection: a ROLLBACK of the caller's
// transaction does not undo a training (the package documentation says so).
func TestTrainOutlivesRollback(t *testing.T) {
	_, db := ptsHost(t)
	ctx := context.Background()
	conn, err := db.Conn(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	if _, err := conn.ExecContext(ctx, "BEGIN"); err != nil {
		t.Fatal(err)
	}
	if _, err := trQuery(conn, "CALL copse_train('m', 'pts', target := 'label', exclude := ['l'], trees := 2)"); err != nil {
		t.Fatal(err)
	}
	if _, err := conn.ExecContext(ctx, "ROLLBACK"); err != nil {
		t.Fatal(err)
	}
	if r := trRows(t, db, "SELECT name, version FROM copse_models()"); len(r) != 1 || r[0][0] != "m" {
		t.Errorf("after ROLLBACK: %v, want m@1 kept", r)
	}
}
