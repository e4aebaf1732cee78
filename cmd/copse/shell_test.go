package main

import (
	"context"
	"io"
	"os"
	"strings"
	"testing"
	"time"
)

// scriptedLines feeds the shell prepared input; errAbort entries stand for Ctrl-C at
// the prompt. It records the prompts shown and the history entries.
type scriptedLines struct {
	lines    []any // string or error
	prompts  []string
	history  []string
	isClosed bool
}

func (s *scriptedLines) ReadLine(prompt string) (string, error) {
	s.prompts = append(s.prompts, prompt)
	if len(s.lines) == 0 {
		return "", io.EOF
	}
	next := s.lines[0]
	s.lines = s.lines[1:]
	if err, ok := next.(error); ok {
		return "", err
	}
	return next.(string), nil
}

func (s *scriptedLines) Remember(e string) { s.history = append(s.history, e) }
func (s *scriptedLines) Close() error      { s.isClosed = true; return nil }

func TestShellParse(t *testing.T) {
	d, out, errOut := testDeps("")
	var got *ShellOptions
	code := parse(d, newShellCmd(d, func(_ context.Context, o *ShellOptions) error { got = o; return nil }), "shell", "--db", "f.duckdb")
	if code != exitOK || got == nil {
		t.Fatalf("exit code %d, options %v (stderr %q)", code, got, errOut.String())
	}
	if got.DB != "f.duckdb" {
		t.Errorf("db %q, want f.duckdb", got.DB)
	}
	checkOutput(t, "stdout", out, "")

	d, _, errOut = testDeps("")
	code = parse(d, newShellCmd(d, func(context.Context, *ShellOptions) error { t.Error("ran"); return nil }), "shell", "extra")
	if code != exitUsage {
		t.Errorf("exit code %d, want %d", code, exitUsage)
	}
	checkOutput(t, "stderr", errOut, "copse: unknown command \"extra\" for \"copse shell\"\nRun 'copse shell --help' for usage.\n")
}

func TestShellRun(t *testing.T) {
	d, out, errOut := testDeps("")
	d.IO.InTTY = true // typed at a terminal: an error is shown and the shell goes on
	lines := &scriptedLines{lines: []any{
		".help",
		"SELECT 1 AS a,",
		"  'x;y' AS b;",
		"SELECT 'dropped'",
		errAbort, // Ctrl-C at the prompt clears the unfinished statement
		"",
		".timer on",
		"SELECT 2 AS c; SELECT * FROM missing_table; SELECT 3 AS d;",
		".timer off",
		".format csv",
		"SELECT 4 AS e;",
		".bogus",
		".timer maybe",
		"SELECT 5 AS f",
	}}
	tick := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	opts := &ShellOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: noInterrupts,
		Lines: func() lineReader { return lines },
		Now:   func() time.Time { tick = tick.Add(250 * time.Millisecond); return tick },
	}
	if err := runShell(context.Background(), opts); err != nil {
		t.Fatal(err)
	}
	checkOutput(t, "stdout", out, shellHelp+
		"a  b\n-  ---\n1  x;y\n1 row\n\n"+
		"c\n-\n2\n1 row\n\n"+
		"\ne\n4\n"+ // csv separates its tables with a blank line
		"\nf\n5\n")
	checkOutput(t, "stderr", errOut, "copse shell: statements end with ';'. Type .help for help, .quit to leave.\n"+
		"time: 0.250 s\n"+
		"error: Catalog Error: Table with name missing_table does not exist!\nDid you mean \"pg_tables\"?\n\nLINE 1: SELECT * FROM missing_table\n                      ^\n"+
		"unknown shell command .bogus (try .help)\n"+
		"usage: .timer on|off\n")
	wantPrompts := []string{promptFirst, promptFirst, promptMore, promptFirst, promptMore, promptFirst, promptFirst,
		promptFirst, promptFirst, promptFirst, promptFirst, promptFirst, promptFirst, promptFirst, promptMore}
	if len(lines.prompts) != len(wantPrompts) {
		t.Fatalf("prompts %q, want %q", lines.prompts, wantPrompts)
	}
	for i := range wantPrompts {
		if lines.prompts[i] != wantPrompts[i] {
			t.Errorf("prompt %d: %q, want %q", i, lines.prompts[i], wantPrompts[i])
		}
	}
	wantHistory := []string{".help", "SELECT 1 AS a,\n  'x;y' AS b;", ".timer on",
		"SELECT 2 AS c; SELECT * FROM missing_table; SELECT 3 AS d;", ".timer off", ".format csv", "SELECT 4 AS e;", ".bogus", ".timer maybe"}
	if len(lines.history) != len(wantHistory) {
		t.Fatalf("history %q, want %q", lines.history, wantHistory)
	}
	for i := range wantHistory {
		if lines.history[i] != wantHistory[i] {
			t.Errorf("history %d: %q, want %q", i, lines.history[i], wantHistory[i])
		}
	}
	if !lines.isClosed {
		t.Error("line reader not closed")
	}
}

func TestShellInterruptsStatementNotShell(t *testing.T) {
	d, out, errOut := testDeps("")
	d.IO.InTTY = true
	lines := &scriptedLines{lines: []any{
		"SELECT count(*) FROM range(1000000000000);",
		"SELECT 'still here' AS s;",
		".quit",
		"SELECT 'not reached';",
	}}
	calls := 0
	opts := &ShellOptions{IO: d.IO, OpenHost: d.OpenHost, Lines: func() lineReader { return lines },
		// The session subscription (call 1) sees nothing; the first statement's
		// subscription (call 2) gets a Ctrl-C; the second statement's none.
		Interrupts: func() (<-chan os.Signal, func()) {
			calls++
			if calls == 2 {
				return pressedInterrupts()
			}
			return noInterrupts()
		},
	}
	if err := runShell(context.Background(), opts); err != nil {
		t.Fatal(err)
	}
	checkOutput(t, "stdout", out, "s\n----------\nstill here\n1 row\n\n")
	checkOutput(t, "stderr", errOut, "copse shell: statements end with ';'. Type .help for help, .quit to leave.\ninterrupted\n")
}

func TestShellPlainInput(t *testing.T) {
	d, out, errOut := testDeps("SELECT 7 AS n;\nSELECT\n 8 AS m")
	code := runCmd(t, d, "shell")
	if code != exitOK {
		t.Fatalf("exit code %d (stderr %q)", code, errOut.String())
	}
	checkOutput(t, "stdout", out, "n\n-\n7\n1 row\n\nm\n-\n8\n1 row\n\n")
	checkOutput(t, "stderr", errOut, "")
}

// TestShellPlainInputFails: with input that is not a terminal (a pipe or a file) the
// shell runs like `copse sql`: the first failing statement or shell command ends it
// with exit code 1, naming the input line, and nothing after it runs.
func TestShellPlainInputFails(t *testing.T) {
	tests := []struct {
		name, in, out, errPrefix string
	}{
		{"statement", "SELECT 1 AS a;\nSELECT * FROM\n  missing_table;\nSELECT 2 AS b;\n",
			"a\n-\n1\n1 row\n\n", "copse: statement at line 2: Catalog Error: Table with name missing_table does not exist!"},
		{"second on a line", "SELECT 1 AS a; SELECT x FROM missing_table; SELECT 2 AS b;\n",
			"a\n-\n1\n1 row\n\n", "copse: statement at line 1: Catalog Error: Table with name missing_table does not exist!"},
		{"unfinished at the end", "SELECT 1 AS a;\n\nSELECT nope\n",
			"a\n-\n1\n1 row\n\n", "copse: statement at line 3: Binder Error: Referenced column \"nope\" was not found"},
		{"shell command", "SELECT 1 AS a;\n.bogus\nSELECT 2 AS b;\n",
			"a\n-\n1\n1 row\n\n", "copse: line 2: unknown shell command .bogus (try .help)\n"},
		{"shell command usage", ".timer maybe\nSELECT 2 AS b;\n", "", "copse: line 1: usage: .timer on|off\n"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d, out, errOut := testDeps(tt.in)
			if code := runCmd(t, d, "shell"); code != exitError {
				t.Errorf("exit code %d, want %d", code, exitError)
			}
			checkOutput(t, "stdout", out, tt.out)
			if !strings.HasPrefix(errOut.String(), tt.errPrefix) {
				t.Errorf("stderr %q, want it to start with %q", errOut.String(), tt.errPrefix)
			}
		})
	}
}

// TestShellPlainInputInterrupted: Ctrl-C during a statement read from a pipe ends the
// shell with the exit code `copse sql` gives.
func TestShellPlainInputInterrupted(t *testing.T) {
	d, out, errOut := testDeps("SELECT count(*) FROM range(1000000000000);\nSELECT 'not reached' AS s;\n")
	d.Interrupts = pressedInterrupts
	if code := runCmd(t, d, "shell"); code != exitInterrupted {
		t.Errorf("exit code %d, want %d", code, exitInterrupted)
	}
	checkOutput(t, "stdout", out, "")
	if !strings.HasPrefix(errOut.String(), "copse: interrupted") {
		t.Errorf("stderr %q, want it to start with %q", errOut.String(), "copse: interrupted")
	}
}
