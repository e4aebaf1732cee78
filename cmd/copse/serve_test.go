package main

import (
	"bytes"
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"github.com/copse-dev/copse/udf"
)

func TestServeParse(t *testing.T) {
	tests := []struct {
		name    string
		args    []string
		want    ServeOptions
		code    int
		wantErr string
	}{
		{name: "defaults", args: []string{"serve"},
			want: ServeOptions{Listen: "127.0.0.1:5433", MaxConnections: 64}},
		{name: "everything", args: []string{"serve", "--db", "x.duckdb", "--listen", "0.0.0.0:6000", "--password-file", "pw",
			"--tls-cert", "c.pem", "--tls-key", "k.pem", "--read-only", "--max-connections", "5", "--statement-timeout", "90s"},
			want: ServeOptions{DB: "x.duckdb", Listen: "0.0.0.0:6000", PasswordFile: "pw", TLSCert: "c.pem", TLSKey: "k.pem",
				ReadOnly: true, MaxConnections: 5, StatementTimeout: 90 * time.Second}},
		{name: "cert without key", args: []string{"serve", "--tls-cert", "c.pem"}, code: exitUsage,
			wantErr: "copse: give --tls-cert and --tls-key together\nRun 'copse serve --help' for usage.\n"},
		{name: "read-only in memory", args: []string{"serve", "--read-only"}, code: exitUsage,
			wantErr: "copse: --read-only needs --db FILE: a fresh in-memory database has nothing to read\nRun 'copse serve --help' for usage.\n"},
		{name: "negative limit", args: []string{"serve", "--max-connections", "-1"}, code: exitUsage,
			wantErr: "copse: --max-connections must be 0 (no limit) or more, not -1\nRun 'copse serve --help' for usage.\n"},
		{name: "bad listen", args: []string{"serve", "--listen", "5433"}, code: exitUsage,
			wantErr: "copse: --listen \"5433\": want HOST:PORT\nRun 'copse serve --help' for usage.\n"},
		{name: "bad timeout", args: []string{"serve", "--statement-timeout", "soon"}, code: exitUsage,
			wantErr: "copse: invalid argument \"soon\" for \"--statement-timeout\" flag: time: invalid duration \"soon\"\nRun 'copse serve --help' for usage.\n"},
		{name: "argument", args: []string{"serve", "x.duckdb"}, code: exitUsage,
			wantErr: "copse: unknown command \"x.duckdb\" for \"copse serve\"\nRun 'copse serve --help' for usage.\n"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			d, out, errOut := testDeps("")
			var got *ServeOptions
			code := parse(d, newServeCmd(d, func(_ context.Context, o *ServeOptions) error { got = o; return nil }), tt.args...)
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
			g := *got
			g.IO, g.OpenHost, g.Stops, g.Listening = nil, nil, nil, nil
			if !reflect.DeepEqual(g, tt.want) {
				t.Errorf("options %+v, want %+v", g, tt.want)
			}
		})
	}
}

// servedCmd runs `copse serve` with args in the background and returns its address,
// the host it opened, a function that stops it (as SIGTERM would) and waits for its
// exit code, and its standard error.
func servedCmd(t *testing.T, args ...string) (addr string, host func() *udf.Host, stop func() int, errOut *bytes.Buffer) {
	t.Helper()
	d, _, errOut := testDeps("")
	hostc := make(chan *udf.Host, 1)
	d.OpenHost = func(ctx context.Context, path string) (*udf.Host, error) {
		h, err := udf.Open(ctx, path)
		if err == nil {
			hostc <- h
		}
		return h, err
	}
	addrc := make(chan string, 1)
	sigs := make(chan os.Signal, 1)
	cmd := newServeCmd(d, func(ctx context.Context, o *ServeOptions) error {
		o.Listening = func(a net.Addr) { addrc <- a.String() }
		o.Stops = func() (<-chan os.Signal, func()) { return sigs, func() {} }
		return runServe(ctx, o)
	})
	codec := make(chan int, 1)
	go func() { codec <- parse(d, cmd, append([]string{"serve", "--listen", "127.0.0.1:0"}, args...)...) }()
	select {
	case addr = <-addrc:
	case code := <-codec:
		t.Fatalf("serve exited with %d: %s", code, errOut.String())
	}
	h := <-hostc
	stopped := false
	var code int
	stop = func() int {
		if !stopped {
			stopped = true
			sigs <- os.Interrupt
			code = <-codec
		}
		return code
	}
	t.Cleanup(func() { stop() })
	return addr, func() *udf.Host { return h }, stop, errOut
}

// The psql session: training, scoring, importance, a failing call, then a long
// training that psql cancels (SIGINT makes psql send a CancelRequest), then a check
// that the catalog holds only the first model.
const psqlScript = `\set VERBOSITY verbose
CREATE TABLE points AS
SELECT i AS id, (i * 7919 % 1000) / 1000.0 AS x1, (i * 104729 % 997) / 997.0 AS x2,
       ((i * 7919 % 1000) / 1000.0 + (i * 104729 % 997) / 997.0 > 1.0) AS y
FROM range(20000) t(i);
SELECT model, version, trees FROM copse_train('psql_model', 'SELECT x1, x2, y FROM points', target := 'y', trees := 5, seed := 3);
SELECT id, round(copse_score('psql_model', p), 6) AS score FROM points p WHERE id < 5 ORDER BY id;
SELECT feature FROM copse_importance('psql_model') ORDER BY rank;
SELECT * FROM copse_train('psql_model', 'points', target := 'no_such_column');
SELECT 'training' AS marker;
SELECT * FROM copse_train('slow', 'SELECT x1, x2, y FROM points', target := 'y', trees := 100000, seed := 1);
SELECT count(*) AS models FROM copse_models();
`

func TestServePsql(t *testing.T) {
	psql, err := exec.LookPath("psql")
	if err != nil {
		t.Fatal("psql is not on PATH: install Debian's postgresql-client (apt-get install -y postgresql-client), as .ci/run does")
	}
	addr, host, stop, errOut := servedCmd(t, "--db", filepath.Join(t.TempDir(), "served.duckdb"))
	hostName, port, _ := net.SplitHostPort(addr)
	script := filepath.Join(t.TempDir(), "session.sql")
	if err := os.WriteFile(script, []byte(psqlScript), 0o600); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(psql, "-X", "-A", "-F", ",", "-P", "footer=off",
		"-h", hostName, "-p", port, "-U", "analyst", "-d", "copse", "-f", script)
	cmd.Env = append(os.Environ(), "PGCONNECT_TIMEOUT=10")
	var out, perr bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &perr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	// Wait for the long training to grow trees, then press Ctrl-C in psql.
	waited := 0
	for ; waited < 6000; waited++ {
		if jobs := host().Jobs(); len(jobs) > 0 && jobs[0].Model == "slow" && jobs[0].TreesDone > 0 {
			break
		}
		time.Sleep(5 * time.Millisecond)
	}
	if waited == 6000 {
		t.Fatalf("the long training never started; psql said:\n%s\n%s", out.String(), perr.String())
	}
	cmd.Process.Signal(os.Interrupt)
	cmd.Wait() // psql's exit status after a cancel is its own business; the output tells
	stdout, stderr := out.String(), perr.String()
	t.Logf("psql stdout:\n%s\npsql stderr:\n%s", stdout, stderr)

	// Scores and importance as psql printed them must equal what the database says
	// in-process.
	var want strings.Builder
	want.WriteString("model,version,trees\npsql_model,1,5\n")
	want.WriteString("id,score\n")
	rows, err := host().DB().Query("SELECT id, round(copse_score('psql_model', p), 6) FROM points p WHERE id < 5 ORDER BY id")
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var id int64
		var score float64
		rows.Scan(&id, &score)
		fmt.Fprintf(&want, "%d,%v\n", id, score)
	}
	rows.Close()
	want.WriteString("feature\n")
	rows, err = host().DB().Query("SELECT feature FROM copse_importance('psql_model') ORDER BY rank")
	if err != nil {
		t.Fatal(err)
	}
	for rows.Next() {
		var f string
		rows.Scan(&f)
		want.WriteString(f + "\n")
	}
	rows.Close()
	if !strings.Contains(stdout, want.String()) {
		t.Errorf("psql printed\n%s\nwant it to contain\n%s", stdout, want.String())
	}
	for _, line := range []string{
		`ERROR:  22023: Binder Error: copse_train "psql_model": target "no_such_column": no such column`,
		"ERROR:  57014: canceling statement due to user request",
	} {
		if !strings.Contains(stderr, line) {
			t.Errorf("psql's errors lack %q", line)
		}
	}
	var models int64
	if err := host().DB().QueryRow("SELECT count(*) FROM copse_models()").Scan(&models); err != nil {
		t.Fatal(err)
	}
	if models != 1 {
		t.Errorf("%d models after the cancelled training, want 1", models)
	}
	if code := stop(); code != exitOK {
		t.Errorf("serve exit code %d: %s", code, errOut.String())
	}
	if !strings.Contains(errOut.String(), "copse serve: stopped") {
		t.Errorf("serve's messages lack the clean stop: %q", errOut.String())
	}
}

func TestServeRefusesOpenAddressWithoutPasswords(t *testing.T) {
	d, _, errOut := testDeps("")
	code := runCmd(t, d, "serve", "--listen", "0.0.0.0:0")
	if code != exitError || !strings.Contains(errOut.String(), "without --password-file") {
		t.Errorf("exit %d, stderr %q", code, errOut.String())
	}
}

func TestServeReadOnly(t *testing.T) {
	db := filepath.Join(t.TempDir(), "ro.duckdb")
	d, _, errOut := testDeps("")
	if code := runCmd(t, d, "sql", "--db", db, "-c", "CREATE TABLE t AS SELECT 1 AS a"); code != exitOK {
		t.Fatalf("setup: %s", errOut.String())
	}
	addr, _, _, _ := servedCmd(t, "--db", db, "--read-only")
	psql, err := exec.LookPath("psql")
	if err != nil {
		t.Fatal("psql is not on PATH: install Debian's postgresql-client (apt-get install -y postgresql-client), as .ci/run does")
	}
	hostName, port, _ := net.SplitHostPort(addr)
	out, _ := exec.Command(psql, "-X", "-A", "-t", "-v", "VERBOSITY=verbose", "-h", hostName, "-p", port, "-U", "analyst", "-d", "copse",
		"-c", "SELECT sum(a) FROM t", "-c", "INSERT INTO t VALUES (2)").CombinedOutput()
	if !strings.Contains(string(out), "1\n") || !strings.Contains(string(out), "ERROR:  25006") {
		t.Errorf("read-only session printed %q; want the sum and a 25006 error for the insert", out)
	}
}
