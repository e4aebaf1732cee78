package udf

import (
	"bytes"
	"database/sql"
	"fmt"
	"math"
	"net"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

// The exported SQL is checked against copse_score itself: both score the same rows, the
// export on a plain DuckDB database that has no copse functions, and they must agree to
// 1e-12 on every row (NULL where copse_score gives NULL).

// xsTrainCols are the columns of xsMake's tables that are targets or not features.
var xsTrainCols = []string{"id", "day", "y_value", "y_binary", "y_class", "y_count", "years"}

// xsMake creates name: genTable's rows (numeric, VARCHAR, BOOLEAN inputs with NULLs;
// unseen adds the level 'mauve') plus a count target and an exposure. nan puts NaN into
// x1 on some rows and leaves the exposure NULL on others.
func xsMake(t testing.TB, db *sql.DB, name string, n, seed int, unseen, nan bool) {
	t.Helper()
	genTable(t, db, name+"_g", n, seed, unseen)
	x1, years := "x1", "0.5 + (id % 7) / 3.0"
	if nan {
		x1 = "CASE WHEN id % 23 = 4 THEN 'NaN'::DOUBLE ELSE x1 END"
		years = "CASE WHEN id % 29 = 1 THEN NULL ELSE " + years + " END"
	}
	mustExec(t, db, fmt.Sprintf(`CREATE TABLE %s AS SELECT * REPLACE (%s AS x1),
		((id %% 5) + (x1 > 0.5)::INTEGER + CASE colour WHEN 'red' THEN 2 ELSE 0 END)::DOUBLE AS y_count,
		(%s)::DOUBLE AS years FROM %s_g`, name, x1, years, name))
}

// xsExclude lists every non-feature column but the target, for copse_train.
func xsExclude(target string) string {
	var q []string
	for _, c := range xsTrainCols {
		if c != target && (c != "years" || target != "y_count") { // the exposure stays
			q = append(q, "'"+c+"'")
		}
	}
	return "exclude := [" + strings.Join(q, ", ") + "]"
}

// xsModels are the models the export is checked on: every method, every loss.
var xsModels = []struct{ name, target, opts string }{
	{"fo_reg", "y_value", "trees := 12, seed := 1"},
	{"fo_bin", "y_binary", "trees := 12, seed := 2"},
	{"fo_cls", "y_class", "trees := 12, seed := 3"},
	{"bag", "y_value", "method := 'bagging', trees := 8, seed := 4"},
	{"tree", "y_class", "method := 'tree', seed := 5"},
	{"b_sq", "y_value", "method := 'boosting', loss := 'squared', trees := 130, max_depth := 4, seed := 6"},
	{"b_abs", "y_value", "method := 'boosting', loss := 'absolute', trees := 20, max_depth := 3, seed := 7"},
	{"b_hub", "y_value", "method := 'boosting', loss := 'huber', trees := 20, max_depth := 3, seed := 8"},
	{"b_q", "y_value", "method := 'boosting', loss := 'quantile', quantile := 0.8, trees := 20, max_depth := 3, seed := 9"},
	{"b_log", "y_binary", "method := 'boosting', loss := 'logistic', trees := 30, max_depth := 3, seed := 10"},
	{"b_mn", "y_class", "method := 'boosting', loss := 'multinomial', trees := 40, max_depth := 3, seed := 11"},
	{"b_poi", "y_count", "method := 'boosting', loss := 'poisson', exposure := 'years', trees := 25, max_depth := 3, seed := 12"},
	{"ada", "y_class", "method := 'adaboost', trees := 10, max_depth := 2, seed := 13"},
	{"ada_bin", "y_binary", "method := 'adaboost', trees := 10, max_depth := 2, seed := 14"},
	{"lin", "y_value", "method := 'linear'"},
	{"lin_bin", "y_binary", "method := 'linear'"},
}

// xsSetup trains xsModels and the blends on table tr and returns the host.
func xsSetup(t testing.TB) *Host {
	t.Helper()
	h := openHost(t)
	db := h.DB()
	xsMake(t, db, "tr", 500, 1, false, false)
	for _, m := range xsModels {
		opts := "target := '" + m.target + "', " + xsExclude(m.target) + ", " + m.opts
		bsTrain(t, db, m.name, "tr", opts)
	}
	trRows(t, db, "SELECT * FROM copse_blend('bl_avg', members := ['fo_reg', 'b_sq', 'lin'], weights := '5, 3, 2')")
	trRows(t, db, "SELECT * FROM copse_blend('bl_vote', members := ['fo_bin', 'b_log', 'lin_bin', 'ada_bin'], rule := 'vote')")
	trRows(t, db, "SELECT * FROM copse_blend('bl_cls', members := ['fo_cls', 'b_mn', 'tree'], weights := '1, 2, 1')")
	return h
}

// xsCase is one comparison: a model and the copse_score class argument ("" for none).
type xsCase struct{ model, class string }

func xsCases(t testing.TB, h *Host) []xsCase {
	var cs []xsCase
	names := []string{"bl_avg", "bl_vote", "bl_cls"}
	for _, m := range xsModels {
		names = append(names, m.name)
	}
	for _, n := range names {
		m, _ := trModel(t, h, n)
		switch {
		case len(m.Classes) > 2:
			for _, c := range m.Classes {
				cs = append(cs, xsCase{n, c})
			}
		case len(m.Classes) == 2:
			cs = append(cs, xsCase{n, ""}, xsCase{n, m.Classes[0]})
		default:
			cs = append(cs, xsCase{n, ""})
		}
	}
	return cs
}

// xsCompare fails unless got equals want to tol relative to max(1, |want|), NULL (NaN)
// matching NULL.
func xsCompare(t testing.TB, what string, got, want []float64, tol float64) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d rows, want %d", what, len(got), len(want))
	}
	for i := range got {
		g, w := got[i], want[i]
		if math.IsNaN(g) || math.IsNaN(w) {
			if math.IsNaN(g) != math.IsNaN(w) {
				t.Fatalf("%s: row %d: got %v, copse_score %v", what, i, g, w)
			}
			continue
		}
		if math.Abs(g-w) > tol*math.Max(1, math.Abs(w)) {
			t.Fatalf("%s: row %d: got %.17g, copse_score %.17g (difference %g)", what, i, g, w, g-w)
		}
	}
}

// xsExport runs copse_export and returns the text.
func xsExport(t testing.TB, db *sql.DB, model, opts string) string {
	t.Helper()
	q := "SELECT text FROM copse_export('" + model + "'" + opts + ")"
	var text string
	if err := db.QueryRow(q).Scan(&text); err != nil {
		t.Fatalf("%s: %v", q, err)
	}
	return text
}

// xsClassOpt is copse_export's class option and copse_score's third argument for c.
func xsClassOpt(c xsCase) (exportOpt, scoreArg string) {
	if c.class == "" {
		return "", ""
	}
	return ", class := '" + sqlEscape(c.class) + "'", ", '" + sqlEscape(c.class) + "'"
}

func TestExportSQLMatchesScoreDuckDB(t *testing.T) {
	h := xsSetup(t)
	db := h.DB()
	dir := t.TempDir()
	// Scoring rows: other draws, an unseen level, NULLs, and (duckdb dialect) NaN and
	// NULL exposures.
	xsMake(t, db, "sc", 400, 9, true, false)
	xsMake(t, db, "scn", 400, 9, true, true)
	plain, err := sql.Open("duckdb", "")
	if err != nil {
		t.Fatal(err)
	}
	defer plain.Close()
	for _, tab := range []string{"sc", "scn"} {
		file := filepath.Join(dir, tab+".parquet")
		mustExec(t, db, "COPY "+tab+" TO '"+file+"' (FORMAT parquet)")
		mustExec(t, plain, "CREATE TABLE "+tab+" AS SELECT * FROM '"+file+"'")
	}
	if n := queryFloats(t, plain, "SELECT count(*) FROM duckdb_functions() WHERE function_name LIKE 'copse%'"); n[0] != 0 {
		t.Fatalf("the plain database has %v copse functions", n[0])
	}
	for _, c := range xsCases(t, h) {
		for _, d := range []struct{ dialect, table string }{{"standard", "sc"}, {"duckdb", "scn"}} {
			what := fmt.Sprintf("%s class %q dialect %s", c.model, c.class, d.dialect)
			exportOpt, scoreArg := xsClassOpt(c)
			text := xsExport(t, db, c.model, ", dialect := '"+d.dialect+"', relation := '"+d.table+"', key := 'id'"+exportOpt)
			got := queryFloats(t, plain, "SELECT score FROM ("+text+") ORDER BY id")
			want := queryFloats(t, db, "SELECT copse_score('"+c.model+"', s"+scoreArg+") FROM "+d.table+" s ORDER BY id")
			xsCompare(t, what, got, want, 1e-12)
		}
	}
	// Multiclass without a class: one column per class, as copse_score gives each.
	for _, model := range []string{"fo_cls", "b_mn", "ada", "bl_cls"} {
		text := xsExport(t, db, model, ", dialect := 'duckdb', relation := 'scn', key := 'id'")
		m, _ := trModel(t, h, model)
		for _, c := range m.Classes {
			got := queryFloats(t, plain, "SELECT "+quoteIdent(c)+" FROM ("+text+") ORDER BY id")
			want := queryFloats(t, db, "SELECT copse_score('"+model+"', s, '"+c+"') FROM scn s ORDER BY id")
			xsCompare(t, model+" column "+c, got, want, 1e-12)
		}
	}
}

// format := 'pmml' gives copse_pmml's document.
func TestExportPMMLFormat(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blMix)
	bsTrain(t, db, "fo", "mix", "target := 'y', trees := 3, exclude := ['i', 'cls']")
	got := xsExport(t, db, "fo", ", format := 'PMML'")
	var want string
	if err := db.QueryRow("SELECT text FROM copse_pmml('fo')").Scan(&want); err != nil {
		t.Fatal(err)
	}
	if got != want || !strings.Contains(got, "<PMML") {
		t.Errorf("copse_export format 'pmml' gives %.200q, copse_pmml %.200q", got, want)
	}
}

// Bad calls name what is wrong and leave the catalog as it was.
func TestExportSQLErrors(t *testing.T) {
	h := openHost(t)
	db := h.DB()
	mustExec(t, db, blMix)
	bsTrain(t, db, "fo", "mix", "target := 'y', trees := 3, exclude := ['i', 'cls']")
	bsTrain(t, db, "cl", "mix", "target := 'cls', trees := 3, exclude := ['i', 'y']")
	for _, tc := range []struct {
		q    string
		want []string
	}{
		{"SELECT * FROM copse_export('fo', format := 'pmml', dialect := 'duckdb')", []string{"format := 'pmml'", "dialect"}},
		{"SELECT * FROM copse_export('fo', format := 'xml')", []string{"format := 'xml'", "'sql'", "'pmml'"}},
		{"SELECT * FROM copse_export('fo', dialect := 'oracle')", []string{"dialect := 'oracle'", "'postgres'"}},
		{"SELECT * FROM copse_export('nope')", []string{"copse_export", `"nope"`}},
		{"SELECT * FROM copse_export('fo', class := 'hi')", []string{`class "hi"`, "regression"}},
		{"SELECT * FROM copse_export('cl', class := 'mid')", []string{`class "mid"`, `"hi"`, `"lo"`}},
		{"SELECT * FROM copse_export('fo', key := 'score')", []string{`key column "score"`}},
		{"SELECT * FROM copse_export('fo', relation := 'a..b')", []string{`relation "a..b"`}},
		{"SELECT * FROM copse_export('fo', dialect := NULL)", []string{"dialect is NULL"}},
	} {
		trWantErr(t, db, tc.q, tc.want...)
	}
}

// xsPostgres is a PostgreSQL server the test started: psql runs statements on it.
type xsPostgres struct {
	psql string   // the psql binary
	args []string // connection arguments
	dir  string
}

// xsStartPostgres initialises a cluster in a temporary directory, starts it on a free
// loopback port and stops it when the test ends. PostgreSQL refuses to run as root, so
// as root the server runs as the "postgres" user the Debian package creates.
func xsStartPostgres(t *testing.T) *xsPostgres {
	t.Helper()
	bins, _ := filepath.Glob("/usr/lib/postgresql/*/bin/initdb")
	if len(bins) == 0 {
		t.Fatal("PostgreSQL is not installed: this test needs Debian's postgresql package (apt-get install -y postgresql), binaries in /usr/lib/postgresql/*/bin")
	}
	sort.Strings(bins)
	bin := filepath.Dir(bins[len(bins)-1])
	dir := t.TempDir()
	var asUser []string
	if os.Geteuid() == 0 {
		u, err := user.Lookup("postgres")
		if err != nil {
			t.Fatalf("running as root, PostgreSQL needs another user: %v", err)
		}
		uid, _ := strconv.Atoi(u.Uid)
		gid, _ := strconv.Atoi(u.Gid)
		// The server user must reach the directory: open its parents for traversal.
		for d := dir; d != filepath.Dir(d) && strings.HasPrefix(d, os.TempDir()+"/"); d = filepath.Dir(d) {
			if err := os.Chmod(d, 0o711); err != nil {
				t.Fatal(err)
			}
		}
		if err := os.Chown(dir, uid, gid); err != nil {
			t.Fatal(err)
		}
		asUser = []string{"setpriv", "--reuid=" + u.Uid, "--regid=" + u.Gid, "--init-groups", "--"}
	}
	command := func(name string, args ...string) *exec.Cmd {
		all := append(append(append([]string{}, asUser...), filepath.Join(bin, name)), args...)
		c := exec.Command(all[0], all[1:]...)
		c.Dir = dir
		return c
	}
	data := filepath.Join(dir, "data")
	if out, err := command("initdb", "-D", data, "-A", "trust", "-U", "copse", "-E", "UTF8", "--locale=C", "--no-sync").CombinedOutput(); err != nil {
		t.Fatalf("initdb: %v\n%s", err, out)
	}
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	port := strconv.Itoa(l.Addr().(*net.TCPAddr).Port)
	l.Close()
	var logBuf bytes.Buffer
	srv := command("postgres", "-D", data, "-k", dir, "-h", "127.0.0.1", "-p", port,
		"-c", "fsync=off", "-c", "shared_buffers=16MB", "-c", "max_connections=10")
	srv.Stdout, srv.Stderr = &logBuf, &logBuf
	if err := srv.Start(); err != nil {
		t.Fatalf("start postgres: %v", err)
	}
	done := make(chan error, 1)
	go func() { done <- srv.Wait() }()
	t.Cleanup(func() {
		srv.Process.Signal(syscall.SIGINT) // fast shutdown
		select {
		case <-done:
		case <-time.After(60 * time.Second):
			srv.Process.Kill()
			<-done
		}
	})
	pg := &xsPostgres{psql: filepath.Join(bin, "psql"), dir: dir,
		args: []string{"-X", "-q", "-v", "ON_ERROR_STOP=1", "-h", "127.0.0.1", "-p", port, "-U", "copse", "-d", "postgres"}}
	for i := 0; ; i++ {
		if _, err := pg.run("SELECT 1"); err == nil {
			break
		}
		select {
		case err := <-done:
			t.Fatalf("postgres exited: %v\n%s", err, logBuf.String())
		case <-time.After(200 * time.Millisecond):
		}
		if i == 300 {
			t.Fatalf("postgres did not accept connections on port %s:\n%s", port, logBuf.String())
		}
	}
	return pg
}

// run runs a script through psql (from a file: scripts outgrow a command line) and
// returns its unaligned, tuples-only output.
func (pg *xsPostgres) run(script string) (string, error) {
	f, err := os.CreateTemp(pg.dir, "script-*.sql")
	if err != nil {
		return "", err
	}
	defer os.Remove(f.Name())
	if _, err := f.WriteString(script); err != nil {
		return "", err
	}
	f.Close()
	out, err := exec.Command(pg.psql, append(append([]string{}, pg.args...), "-A", "-t", "-F", ",", "-f", f.Name())...).CombinedOutput()
	if err != nil {
		return "", fmt.Errorf("psql: %v\n%s", err, out)
	}
	return string(out), nil
}

// floats reads the second field of each "id,value" line (NaN for NULL).
func (pg *xsPostgres) floats(t *testing.T, q string) []float64 {
	t.Helper()
	out, err := pg.run(q)
	if err != nil {
		t.Fatalf("%v\nquery starts %.300s", err, q)
	}
	var vals []float64
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		_, v, _ := strings.Cut(line, ",")
		if v == "" {
			vals = append(vals, math.NaN())
			continue
		}
		f, err := strconv.ParseFloat(v, 64)
		if err != nil {
			t.Fatalf("psql line %q: %v", line, err)
		}
		vals = append(vals, f)
	}
	return vals
}

// The postgres dialect on a real PostgreSQL server scores as copse_score does, to 1e-9.
func TestExportSQLMatchesScorePostgres(t *testing.T) {
	pg := xsStartPostgres(t)
	h := xsSetup(t)
	db := h.DB()
	xsMake(t, db, "scn", 400, 9, true, true)
	// PostgreSQL casts no BOOLEAN to DOUBLE PRECISION: the 0/1 feature travels as INTEGER.
	csv := filepath.Join(pg.dir, "scn.csv")
	mustExec(t, db, "COPY (SELECT id, x1, x2, colour, flag::INTEGER AS flag, small_int, years FROM scn) TO '"+csv+"' (HEADER)")
	if _, err := pg.run(`CREATE TABLE scn (id BIGINT, x1 DOUBLE PRECISION, x2 DOUBLE PRECISION, colour VARCHAR,
		flag INTEGER, small_int INTEGER, years DOUBLE PRECISION);
		\copy scn FROM '` + csv + `' WITH (FORMAT csv, HEADER true)`); err != nil {
		t.Fatal(err)
	}
	if n := pg.floats(t, "SELECT 0, count(*) FROM scn WHERE x1 = 'NaN'"); n[0] == 0 {
		t.Fatal("no NaN rows reached PostgreSQL")
	}
	for _, c := range xsCases(t, h) {
		exportOpt, scoreArg := xsClassOpt(c)
		text := xsExport(t, db, c.model, ", dialect := 'postgres', relation := 'scn', key := 'id'"+exportOpt)
		got := pg.floats(t, "SELECT id, score FROM ("+text+") q ORDER BY id")
		want := queryFloats(t, db, "SELECT copse_score('"+c.model+"', s"+scoreArg+") FROM scn s ORDER BY id")
		xsCompare(t, fmt.Sprintf("%s class %q on PostgreSQL", c.model, c.class), got, want, 1e-9)
	}
}

// BenchmarkExportSQLScore scores 100,000 rows with 500-tree models trained on 2,000
// rows, by copse_score and by the exported SQL (duckdb dialect) on a plain database.
// Trees are depth-capped: a fully grown 500-tree forest exports to about 50 MB of SQL,
// which DuckDB did not finish planning (3 minutes, 17 GB of memory, then stopped).
func BenchmarkExportSQLScore(b *testing.B) {
	rows := 100000
	if v, err := strconv.Atoi(os.Getenv("COPSE_BENCH_ROWS")); err == nil && v > 0 {
		rows = v // e.g. COPSE_BENCH_ROWS=1000000 for the scale of the closing notes
	}
	h := openHost(b)
	db := h.DB()
	xsMake(b, db, "tr", 2000, 1, false, false)
	xsMake(b, db, "big", rows, 3, true, false)
	file := filepath.Join(b.TempDir(), "big.parquet")
	mustExec(b, db, "COPY big TO '"+file+"' (FORMAT parquet)")
	plain, err := sql.Open("duckdb", "")
	if err != nil {
		b.Fatal(err)
	}
	defer plain.Close()
	mustExec(b, plain, "CREATE TABLE big AS SELECT * FROM '"+file+"'")
	for _, m := range []struct{ name, opts string }{
		{"boosting_depth4", "method := 'boosting', max_depth := 4"},
		{"forest_depth6", "max_depth := 6"},
	} {
		bsTrain(b, db, m.name, "tr", "target := 'y_value', "+xsExclude("y_value")+", trees := 500, seed := 1, "+m.opts)
		text := xsExport(b, db, m.name, ", dialect := 'duckdb', relation := 'big'")
		for _, bc := range []struct {
			name string
			db   *sql.DB
			q    string
		}{
			{"copse_score", db, "SELECT sum(copse_score('" + m.name + "', s)) FROM big s"},
			{"exported_sql", plain, "SELECT sum(score) FROM (" + text + ")"},
		} {
			b.Run(m.name+"/"+bc.name, func(b *testing.B) {
				for b.Loop() {
					if v := queryFloats(b, bc.db, bc.q); len(v) != 1 || math.IsNaN(v[0]) {
						b.Fatalf("sum %v", v)
					}
				}
				b.ReportMetric(float64(len(text)), "bytes-text")
			})
		}
	}
}
