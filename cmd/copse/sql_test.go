package main

import (
	"context"
	"os"
	"path/filepath"
	"testing"

	"github.com/copse-dev/copse/internal/sqlrun"
)

func TestSQLParse(t *testing.T) {
	tests := []struct {
		name    string
		args    []string
		inTTY   bool
		want    SQLOptions
		code    int
		wantErr string
	}{
		{name: "inline", args: []string{"sql", "-c", "select 1"}, want: SQLOptions{Format: sqlrun.FormatTable, Inline: "select 1"}},
		{name: "long inline", args: []string{"sql", "--statements=select 2"}, want: SQLOptions{Format: sqlrun.FormatTable, Inline: "select 2"}},
		{name: "file and options", args: []string{"sql", "--db", "x.duckdb", "--format", "csv", "script.sql"}, want: SQLOptions{DB: "x.duckdb", Format: sqlrun.FormatCSV, File: "script.sql"}},
		{name: "dash", args: []string{"sql", "--format=json", "-"}, inTTY: true, want: SQLOptions{Format: sqlrun.FormatJSON, File: "-"}},
		{name: "piped stdin", args: []string{"sql", "--format", "markdown"}, want: SQLOptions{Format: sqlrun.FormatMarkdown, File: "-"}},
		{name: "terminal and nothing", args: []string{"sql"}, inTTY: true, code: exitUsage,
			wantErr: "copse: no statements: give -c SQL, a FILE, or - for standard input (or try 'copse shell')\nRun 'copse sql --help' for usage.\n"},
		{name: "both", args: []string{"sql", "-c", "select 1", "f.sql"}, code: exitUsage,
			wantErr: "copse: give statements with -c or as a file, not both\nRun 'copse sql --help' for usage.\n"},
		{name: "two files", args: []string{"sql", "a.sql", "b.sql"}, code: exitUsage,
			wantErr: "copse: accepts at most 1 arg(s), received 2\nRun 'copse sql --help' for usage.\n"},
		{name: "bad format", args: []string{"sql", "--format", "xml", "-c", "select 1"}, code: exitUsage,
			wantErr: "copse: unknown format \"xml\" (want table, csv, json or markdown)\nRun 'copse sql --help' for usage.\n"},
		{name: "unknown flag", args: []string{"sql", "--nope"}, code: exitUsage,
			wantErr: "copse: unknown flag: --nope\nRun 'copse sql --help' for usage.\n"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d, out, errOut := testDeps("")
			d.IO.InTTY = tt.inTTY
			var got *SQLOptions
			code := parse(d, newSQLCmd(d, func(_ context.Context, o *SQLOptions) error { got = o; return nil }), tt.args...)
			if code != tt.code {
				t.Fatalf("exit code %d, want %d (stderr %q)", code, tt.code, errOut.String())
			}
			checkOutput(t, "stderr", errOut, tt.wantErr)
			checkOutput(t, "stdout", out, "")
			if tt.code != exitOK {
				if got != nil {
					t.Error("run function called on a usage error")
				}
				return
			}
			if got == nil {
				t.Fatal("run function not called")
			}
			if got.DB != tt.want.DB || got.Format != tt.want.Format || got.Inline != tt.want.Inline || got.File != tt.want.File {
				t.Errorf("options: got db=%q format=%q inline=%q file=%q, want db=%q format=%q inline=%q file=%q",
					got.DB, got.Format, got.Inline, got.File, tt.want.DB, tt.want.Format, tt.want.Inline, tt.want.File)
			}
		})
	}
}

func TestSQLRun(t *testing.T) {
	script := filepath.Join(t.TempDir(), "s.sql")
	if err := os.WriteFile(script, []byte("--: From a file\nSELECT 'a;b' AS s; -- trailing comment\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name       string
		args       []string
		stdin      string
		code       int
		out, errOu string
	}{
		{
			name: "table",
			args: []string{"sql", "-c", "SELECT 1 AS n, 'x' AS label, NULL AS nothing; SELECT 2.5::DOUBLE AS f, DATE '2025-03-04' AS d"},
			out:  "n  label  nothing\n-  -----  -------\n1  x         NULL\n1 row\n\nf    d\n---  ----------\n2.5  2025-03-04\n1 row\n\n",
		},
		{
			name:  "commands report on stderr",
			args:  []string{"sql", "-c", "CREATE TABLE t (i INTEGER); INSERT INTO t VALUES (1), (22); SELECT i FROM t ORDER BY i"},
			out:   "i\n--\n 1\n22\n2 rows\n\n",
			errOu: "ok\nok, 2 rows\n",
		},
		{
			name: "csv",
			args: []string{"sql", "--format", "csv", "-c", "SELECT 'a,b' AS s, NULL AS n UNION ALL SELECT 'c', 3 ORDER BY s; SELECT 1 AS one"},
			out:  "s,n\n\"a,b\",\nc,3\n\none\n1\n",
		},
		{
			name: "json",
			args: []string{"sql", "--format", "json", "-c", "SELECT 1 AS i, 'q\"' AS s, [1, 2] AS l, {'k': 2.5::DOUBLE} AS st"},
			out:  "[\n{\"i\":1,\"s\":\"q\\\"\",\"l\":[1,2],\"st\":{\"k\":2.5}}\n]\n",
		},
		{
			name: "json empty",
			args: []string{"sql", "--format", "json", "-c", "SELECT 1 AS i WHERE false"},
			out:  "[]\n",
		},
		{
			name: "markdown",
			args: []string{"sql", "--format", "markdown", "-c", "--: A note\nSELECT 'a|b' AS x, 3 AS n"},
			out:  "A note\n| x | n |\n|---|---:|\n| a\\|b | 3 |\n\n",
		},
		{
			name:  "stdin",
			args:  []string{"sql", "-"},
			stdin: "SELECT 42 AS answer;\n",
			out:   "answer\n------\n    42\n1 row\n\n",
		},
		{
			name: "file with note",
			args: []string{"sql", script},
			out:  "From a file\ns\n---\na;b\n1 row\n\n",
		},
		{
			name:  "error stops the script",
			args:  []string{"sql", "-c", "SELECT 1 AS a;\nSELECT * FROM missing_table;\nSELECT 3 AS c"},
			code:  exitError,
			out:   "a\n-\n1\n1 row\n\n",
			errOu: "copse: statement at line 2: Catalog Error: Table with name missing_table does not exist!\nDid you mean \"pg_tables\"?\n\nLINE 1: SELECT * FROM missing_table\n                      ^\n",
		},
		{
			name:  "missing file",
			args:  []string{"sql", filepath.Join(t.TempDir(), "none.sql")},
			code:  exitError,
			errOu: "", // checked by code only: the path is temporary
		},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d, out, errOut := testDeps(tt.stdin)
			code := runCmd(t, d, tt.args...)
			if code != tt.code {
				t.Fatalf("exit code %d, want %d (stderr %q)", code, tt.code, errOut.String())
			}
			checkOutput(t, "stdout", out, tt.out)
			if tt.name != "missing file" {
				checkOutput(t, "stderr", errOut, tt.errOu)
			}
		})
	}
}

func TestSQLInterrupted(t *testing.T) {
	d, out, errOut := testDeps("")
	d.Interrupts = pressedInterrupts
	code := runCmd(t, d, "sql", "-c", "SELECT count(*) FROM range(1000000000000)")
	if code != exitInterrupted {
		t.Fatalf("exit code %d, want %d (stderr %q)", code, exitInterrupted, errOut.String())
	}
	checkOutput(t, "stdout", out, "")
	checkOutput(t, "stderr", errOut, "copse: interrupted\n")
}
