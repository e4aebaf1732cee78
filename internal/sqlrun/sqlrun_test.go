package sqlrun

import (
	"bytes"
	"context"
	"database/sql"
	"errors"
	"math"
	"math/big"
	"strings"
	"testing"
	"time"

	"github.com/duckdb/duckdb-go/v2"

	"github.com/copse-dev/copse/internal/sqlsplit"
)

func TestWriteFormats(t *testing.T) {
	day := time.Date(2025, 3, 4, 0, 0, 0, 0, time.UTC)
	r := &Result{
		Columns: []string{"id", "name", "score", "day", "tags"},
		Types:   []string{"BIGINT", "VARCHAR", "DOUBLE", "DATE", "VARCHAR[]"},
		Rows: [][]any{
			{int64(1), "a\nb", 0.5, day, []any{"x", nil}},
			{int64(20), nil, 1e-7, nil, []any{}},
			{int64(3), "ünï", 12345678.25, day, nil},
		},
	}
	tests := []struct {
		f    Format
		want string
	}{
		{FormatTable, "" +
			"id  name  score        day         tags\n" +
			"--  ----  -----------  ----------  -----------\n" +
			" 1  a             0.5  2025-03-04  [\"x\", NULL]\n" +
			"    b\n" +
			"20  NULL        1e-07  NULL        []\n" +
			" 3  ünï   12345678.25  2025-03-04  NULL\n" +
			"3 rows\n\n"},
		{FormatCSV, "id,name,score,day,tags\n1,\"a\nb\",0.5,2025-03-04,\"[\"\"x\"\", NULL]\"\n20,,1e-07,,[]\n3,ünï,12345678.25,2025-03-04,\n"},
		{FormatJSON, "[\n" +
			`{"id":1,"name":"a\nb","score":0.5,"day":"2025-03-04","tags":["x",null]},` + "\n" +
			`{"id":20,"name":null,"score":1e-7,"day":null,"tags":[]},` + "\n" +
			`{"id":3,"name":"ünï","score":12345678.25,"day":"2025-03-04","tags":null}` + "\n]\n"},
		{FormatMarkdown, "| id | name | score | day | tags |\n|---:|---|---:|---|---|\n" +
			"| 1 | a\\nb | 0.5 | 2025-03-04 | [\"x\", NULL] |\n" +
			"| 20 | NULL | 1e-07 | NULL | [] |\n" +
			"| 3 | ünï | 12345678.25 | 2025-03-04 | NULL |\n\n"},
	}
	for _, tt := range tests {
		var b bytes.Buffer
		if err := write(&b, tt.f, r); err != nil {
			t.Fatalf("%s: %v", tt.f, err)
		}
		if b.String() != tt.want {
			t.Errorf("%s:\n got %q\nwant %q", tt.f, b.String(), tt.want)
		}
	}
}

func TestTextValues(t *testing.T) {
	tests := []struct {
		v    any
		typ  string
		want string
	}{
		{true, "BOOLEAN", "true"},
		{math.Copysign(0, -1), "DOUBLE", "0"},
		{float32(0.1), "FLOAT", "0.1"},
		{2e14, "DOUBLE", "200000000000000"},
		{2e15, "DOUBLE", "2e+15"},
		{time.Date(2025, 1, 2, 3, 4, 5, 600000000, time.UTC), "TIMESTAMP", "2025-01-02 03:04:05.6"},
		{map[string]any{"b": int32(2), "a": "x"}, "STRUCT", `{a: "x", b: 2}`},
		{[]byte{0xab, 0x01}, "BLOB", `\xab01`},
		{duckdb.Decimal{Value: big.NewInt(1234), Scale: 2, Width: 10}, "DECIMAL(10,2)", "12.34"},
		{duckdb.Interval{Days: 3, Micros: 5}, "INTERVAL", "0 months 3 days 5 µs"},
	}
	for _, tt := range tests {
		if got := text(tt.v, tt.typ, "NULL"); got != tt.want {
			t.Errorf("text(%#v) = %q, want %q", tt.v, got, tt.want)
		}
	}
	if got := clip(strings.Repeat("x", 70)); got != strings.Repeat("x", maxCellWidth-1)+"…" {
		t.Errorf("clip: %q", got)
	}
}

func TestParseFormat(t *testing.T) {
	for _, f := range Formats {
		if got, err := ParseFormat(string(f)); err != nil || got != f {
			t.Errorf("ParseFormat(%q) = %q, %v", f, got, err)
		}
	}
	if _, err := ParseFormat("TABLE"); err == nil {
		t.Error("ParseFormat(TABLE): no error")
	}
}

func TestStatusOnly(t *testing.T) {
	count := func(rows ...int64) *Result {
		r := &Result{Columns: []string{"Count"}, Types: []string{"BIGINT"}}
		for _, n := range rows {
			r.Rows = append(r.Rows, []any{n})
		}
		return r
	}
	tests := []struct {
		q      string
		res    *Result
		status string
		ok     bool
	}{
		{"CREATE TABLE t (i INT)", count(), "ok", true},
		{"  /* c */ -- d\n insert into t values (1)", count(3), "ok, 3 rows", true},
		{"(update t set i = 1)", count(1), "ok, 1 row", true},
		{"SET threads = 2", &Result{Columns: []string{"Success"}, Types: []string{"BOOLEAN"}}, "ok", true},
		{"SELECT count(*) AS \"Count\" FROM t", count(5), "", false},
		{"WITH x AS (SELECT 1) SELECT * FROM x", &Result{Columns: []string{"1"}, Types: []string{"INTEGER"}}, "", false},
		{"anything", &Result{}, "ok", true},
		{"PREPARE p AS SELECT 1", &Result{Columns: []string{"Success"}, Types: []string{"BOOLEAN"}}, "ok", true},
		{"DEALLOCATE p", &Result{Columns: []string{"Success"}, Types: []string{"BOOLEAN"}}, "ok", true},
	}
	for _, tt := range tests {
		status, ok := statusOnly(tt.q, tt.res)
		if status != tt.status || ok != tt.ok {
			t.Errorf("statusOnly(%q) = %q, %v; want %q, %v", tt.q, status, ok, tt.status, tt.ok)
		}
	}
}

func TestProgressLine(t *testing.T) {
	start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	tests := []struct {
		jobs []Job
		now  time.Time
		want string
	}{
		{nil, start, ""},
		{[]Job{{Model: "m", Stage: "reading", Trees: 100, Started: start}}, start.Add(1500 * time.Millisecond),
			"training m (reading) [........................]  0/100 trees  0:02 elapsed"},
		{[]Job{{Model: "late_risk", Stage: "training", TreesDone: 25, Trees: 100, Started: start}}, start.Add(10 * time.Second),
			"training late_risk [######..................]  25/100 trees  0:10 elapsed  0:30 left"},
		{[]Job{{Model: "a", Stage: "saving", TreesDone: 100, Trees: 100, Started: start}, {Model: "b"}}, start.Add(3725 * time.Second),
			"training a (saving) [########################]  100/100 trees  1:02:05 elapsed  (+1 more)"},
		{[]Job{{Model: "a", Stage: "training", TreesDone: 10, Trees: 10, Started: start}}, start.Add(59500 * time.Millisecond),
			"training a (finishing) [########################]  10/10 trees  1:00 elapsed"},
	}
	for _, tt := range tests {
		if got := ProgressLine(tt.jobs, tt.now); got != tt.want {
			t.Errorf("ProgressLine:\n got %q\nwant %q", got, tt.want)
		}
	}
}

func TestProgressWatchDrawsAndErases(t *testing.T) {
	start := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	ctx, cancel := context.WithCancel(context.Background())
	var b bytes.Buffer
	calls := 0
	p := &Progress{
		W:     &b,
		Every: time.Millisecond,
		Now:   func() time.Time { return start.Add(4 * time.Second) },
		Jobs: func() []Job {
			calls++
			if calls == 2 {
				cancel() // the statement ends after the second look
			}
			return []Job{{Model: "m", TreesDone: 1, Trees: 2, Started: start}}
		},
	}
	p.Width = 60 // cuts the line to 59 columns
	p.Watch(ctx)
	line := "\rtraining m [############............]  1/2 trees  0:04 elap\x1b[K"
	// One line per look (a tick may still win the race with the cancel), then erased.
	if calls < 2 {
		t.Fatalf("jobs looked at %d times, want at least 2", calls)
	}
	want := strings.Repeat(line, calls) + "\r\x1b[K"
	if b.String() != want {
		t.Errorf("drawn %q, want %q", b.String(), want)
	}
}

func openConn(t *testing.T) *sql.Conn {
	t.Helper()
	db, err := sql.Open("duckdb", "")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { db.Close() })
	conn, err := db.Conn(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return conn
}

func TestRunnerScript(t *testing.T) {
	var out, status bytes.Buffer
	attached := 0
	r := &Runner{Conn: openConn(t), Out: &out, Status: &status, Format: FormatTable,
		Attach: func(ctx context.Context, conn *sql.Conn) (func(), error) { attached++; return func() {}, nil },
	}
	err := r.Script(context.Background(), "--: Numbers\nCREATE TABLE t AS SELECT range AS i FROM range(3);\nSELECT sum(i) AS total FROM t;\n--: The end\n")
	if err != nil {
		t.Fatal(err)
	}
	if got, want := out.String(), "Numbers\ntotal\n-----\n    3\n1 row\n\nThe end\n"; got != want {
		t.Errorf("out %q, want %q", got, want)
	}
	if got, want := status.String(), "ok, 3 rows\n"; got != want {
		t.Errorf("status %q, want %q", got, want)
	}
	if attached != 2 {
		t.Errorf("attached %d statements, want 2", attached)
	}
	err = r.Script(context.Background(), "SELECT 1;\n\nSELECT nope;")
	var se *StatementError
	if !errors.As(err, &se) || se.Line != 3 {
		t.Errorf("error %v, want a StatementError at line 3", err)
	}
}

func TestRunnerCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	var out bytes.Buffer
	r := &Runner{Conn: openConn(t), Out: &out, Format: FormatTable,
		// Ctrl-C while the statement runs.
		Watch: func(context.Context) { cancel() },
	}
	err := r.Statement(ctx, sqlsplit.Statement{SQL: "SELECT count(*) FROM range(1000000000000) a, range(1000) b"})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("error %v, want context.Canceled", err)
	}
	if out.Len() != 0 {
		t.Errorf("printed %q for a cancelled statement", out.String())
	}
}

// A statement that asks for reasons is followed, once per runner, by the caution on
// Status (here a macro stands in for the copse function of that name).
func TestRunnerReasonsCaution(t *testing.T) {
	var out, status bytes.Buffer
	r := &Runner{Conn: openConn(t), Out: &out, Status: &status, Format: FormatTable}
	script := "CREATE MACRO copse_reasons(x) AS x;\nSELECT 1 AS plain;\n"
	if err := r.Script(context.Background(), script); err != nil {
		t.Fatal(err)
	}
	if got := strings.Count(status.String(), "must follow local rules"); got != 1 {
		t.Fatalf("caution written %d times after the first script, want 1: %q", got, status.String())
	}
	status.Reset()
	if err := r.Script(context.Background(), "SELECT copse_reasons(2) AS r;\nSELECT 3 AS plain;\n"); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(status.String(), "local rules") {
		t.Errorf("caution repeated: %q", status.String())
	}
	other := &Runner{Conn: openConn(t), Out: &out, Status: &status, Format: FormatTable}
	status.Reset()
	if err := other.Script(context.Background(), "SELECT 4 AS plain;"); err != nil {
		t.Fatal(err)
	}
	if strings.Contains(status.String(), "local rules") {
		t.Errorf("caution without copse_reasons: %q", status.String())
	}
}
