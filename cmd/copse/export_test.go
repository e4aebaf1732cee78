package main

import (
	"context"
	"database/sql"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestExportParse(t *testing.T) {
	tests := []struct {
		name   string
		args   []string
		code   int
		want   ExportOptions
		stderr string
	}{
		{"sql", []string{"export", "--db", "a.duckdb", "--model", "fo@2", "--dialect", "postgres", "--relation", "sales.rows", "--key", "id", "-o", "fo.sql"}, exitOK,
			ExportOptions{DB: "a.duckdb", Model: "fo@2", File: "fo.sql"}, ""},
		{"pmml", []string{"export", "--db", "a.duckdb", "--model", "fo", "--format", "pmml", "-o", "-"}, exitOK,
			ExportOptions{DB: "a.duckdb", Model: "fo", File: "-"}, ""},
		{"without output", []string{"export", "--db", "a.duckdb", "--model", "fo"}, exitUsage, ExportOptions{},
			"copse: --output is required\nRun 'copse export --help' for usage.\n"},
		{"without model", []string{"export", "--db", "a.duckdb", "-o", "x"}, exitUsage, ExportOptions{},
			"copse: --model is required\nRun 'copse export --help' for usage.\n"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d, _, errOut := testDeps("")
			var got *ExportOptions
			code := parse(d, newExportCmd(d, func(_ context.Context, o *ExportOptions) error { got = o; return nil }), tc.args...)
			if code != tc.code {
				t.Fatalf("exit code %d, want %d (stderr %q)", code, tc.code, errOut.String())
			}
			checkOutput(t, "stderr", errOut, tc.stderr)
			if tc.code != exitOK {
				return
			}
			if got == nil || got.DB != tc.want.DB || got.Model != tc.want.Model || got.File != tc.want.File {
				t.Fatalf("options %+v, want %+v", got, tc.want)
			}
		})
	}
}

// The written SQL scores the rows as copse_score does, on a database without copse.
func TestExportRun(t *testing.T) {
	dir := t.TempDir()
	src := filepath.Join(dir, "a.duckdb")
	file := filepath.Join(dir, "bo.sql")
	modelDB(t, src)
	d, out, errOut := testDeps("")
	if code := runCmd(t, d, "export", "--db", src, "--model", "bo", "--dialect", "duckdb", "--relation", "rows", "--key", "i", "-o", file); code != exitOK {
		t.Fatalf("export: exit code %d (stderr %q)", code, errOut.String())
	}
	checkOutput(t, "stdout", out, "")
	if !strings.HasPrefix(errOut.String(), "exported bo@1 as sql") {
		t.Errorf("stderr %q", errOut.String())
	}
	text, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	h, err := d.OpenHost(context.Background(), src)
	if err != nil {
		t.Fatal(err)
	}
	want := map[int64]float64{}
	rows, err := h.DB().Query("SELECT i, copse_score('bo', r) FROM rows r")
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var i int64
		var v float64
		if err := rows.Scan(&i, &v); err != nil {
			t.Fatal(err)
		}
		want[i] = v
	}
	rows.Close()
	h.Close()
	plain, err := sql.Open("duckdb", "")
	if err != nil {
		t.Fatal(err)
	}
	defer plain.Close()
	if _, err := plain.Exec("ATTACH '" + src + "' AS a (READ_ONLY); CREATE TABLE rows AS SELECT * FROM a.rows; DETACH a"); err != nil {
		t.Fatal(err)
	}
	got, err := plain.Query("SELECT i, score FROM (" + string(text) + ")")
	if err != nil {
		t.Fatal(err)
	}
	defer got.Close()
	n := 0
	for got.Next() {
		var i int64
		var v float64
		if err := got.Scan(&i, &v); err != nil {
			t.Fatal(err)
		}
		if math.Abs(v-want[i]) > 1e-12*math.Max(1, math.Abs(want[i])) {
			t.Fatalf("row %d: exported SQL %v, copse_score %v", i, v, want[i])
		}
		n++
	}
	if n != len(want) || n == 0 {
		t.Fatalf("%d rows scored, want %d", n, len(want))
	}
	// A model that is not there, and a database that is not there, are errors naming them.
	missing := filepath.Join(dir, "missing.duckdb")
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"export", "--db", src, "--model", "nope", "-o", file}, `"nope"`},
		{[]string{"export", "--db", missing, "--model", "bo", "-o", file}, missing},
		{[]string{"export", "--db", src, "--model", "bo", "--dialect", "oracle", "-o", file}, "dialect := 'oracle'"},
	} {
		d, _, errOut := testDeps("")
		if code := runCmd(t, d, tc.args...); code != exitError {
			t.Errorf("%q: exit code %d, want %d", tc.args, code, exitError)
		}
		if !strings.Contains(errOut.String(), tc.want) {
			t.Errorf("%q: stderr %q does not name %q", tc.args, errOut.String(), tc.want)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "missing.duckdb")); err == nil {
		t.Error("export created the missing database")
	}
}
