package pgserve

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"errors"
	"fmt"
	"math/big"
	"net"
	"os"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgtype"
)

// pgCode returns the SQLSTATE of a server error, or "" for other errors.
func pgCode(err error) string {
	var pe *pgconn.PgError
	if errors.As(err, &pe) {
		return pe.Code
	}
	return ""
}

// trainingTable makes a small classification table whose label follows x1 and x2.
const trainingTable = `CREATE TABLE points AS
SELECT i AS id,
       (i * 7919 %% 1000) / 1000.0 AS x1,
       (i * 104729 %% 997) / 997.0 AS x2,
       ((i * 7919 %% 1000) / 1000.0 + (i * 104729 %% 997) / 997.0 > 1.0) AS y
FROM range(%d) t(i)`

func TestExtendedProtocolParameters(t *testing.T) {
	ts := startServer(t, Config{})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 200)); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		sql  string
		args []any
		want int64
	}{
		{"inferred from a column", "SELECT count(*) FROM points WHERE id < $1", []any{int64(50)}, 50},
		{"two parameters", "SELECT count(*) FROM points WHERE id >= $1 AND id < $2", []any{int64(10), int64(30)}, 20},
		{"cast in the text", "SELECT $1::INTEGER * 2", []any{int32(21)}, 42},
		{"untyped is text", "SELECT length($1)", []any{"copse"}, 5},
		{"placeholder in a string stays text", "SELECT length('$1' || $1) /* $2 */", []any{"abc"}, 5},
		{"NULL parameter", "SELECT count(*) FROM points WHERE x1 < $1", []any{nil}, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var got int64
			if err := c.QueryRow(ctx, tt.sql, tt.args...).Scan(&got); err != nil {
				t.Fatal(err)
			}
			if got != tt.want {
				t.Errorf("got %d, want %d", got, tt.want)
			}
		})
	}
}

func TestPreparedStatementReused(t *testing.T) {
	ts := startServer(t, Config{})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 100)); err != nil {
		t.Fatal(err)
	}
	if _, err := c.Prepare(ctx, "below", "SELECT count(*) FROM points WHERE id < $1"); err != nil {
		t.Fatal(err)
	}
	for _, n := range []int64{0, 1, 17, 100, 1000} {
		var got int64
		if err := c.QueryRow(ctx, "below", n).Scan(&got); err != nil {
			t.Fatal(err)
		}
		if want := min(n, 100); got != want {
			t.Errorf("below %d: got %d, want %d", n, got, want)
		}
	}
	// Closing the statement makes its name free again.
	if err := c.Deallocate(ctx, "below"); err != nil {
		t.Fatal(err)
	}
	if _, err := c.Prepare(ctx, "below", "SELECT $1::BIGINT"); err != nil {
		t.Fatal(err)
	}
}

func TestTypesRoundTrip(t *testing.T) {
	ts := startServer(t, Config{})
	c := ts.connect(t)
	ctx := context.Background()
	day := time.Date(2024, 2, 29, 0, 0, 0, 0, time.UTC)
	stamp := time.Date(2024, 2, 29, 13, 45, 30, 123456000, time.UTC)
	tests := []struct {
		name string
		expr string // a DuckDB value of the type
		oid  uint32
		want any
	}{
		{"smallint", "CAST(-12 AS SMALLINT)", pgtype.Int2OID, int16(-12)},
		{"integer", "CAST(123456 AS INTEGER)", pgtype.Int4OID, int32(123456)},
		{"bigint", "CAST(9007199254740993 AS BIGINT)", pgtype.Int8OID, int64(9007199254740993)},
		{"real", "CAST(0.5 AS FLOAT)", pgtype.Float4OID, float32(0.5)},
		{"double", "CAST(0.1 AS DOUBLE)", pgtype.Float8OID, 0.1},
		{"numeric", "CAST(123.45 AS DECIMAL(9,2))", pgtype.NumericOID, "123.45"},
		{"hugeint as numeric", "CAST(170141183460469231731687303715884105727 AS HUGEINT)", pgtype.NumericOID, "170141183460469231731687303715884105727"},
		{"text", "'forêt'", pgtype.TextOID, "forêt"},
		{"bool", "true", pgtype.BoolOID, true},
		{"date", "DATE '2024-02-29'", pgtype.DateOID, day},
		{"timestamp", "TIMESTAMP '2024-02-29 13:45:30.123456'", pgtype.TimestampOID, stamp},
		{"list as json", "[1, 2, 3]", pgtype.JSONOID, `[1,2,3]`},
		{"struct as json", "{'trees': 10, 'method': 'forest'}", pgtype.JSONOID, `{"method":"forest","trees":10}`},
		{"map as json", "MAP {'a': 1.5, 'b': 2}", pgtype.JSONOID, `{"a":1.5,"b":2}`},
		{"null", "CAST(NULL AS INTEGER)", pgtype.Int4OID, nil},
	}
	for _, mode := range []pgx.QueryExecMode{pgx.QueryExecModeCacheStatement, pgx.QueryExecModeSimpleProtocol} {
		for _, tt := range tests {
			t.Run(fmt.Sprintf("%v/%s", mode, tt.name), func(t *testing.T) {
				rows, err := c.Query(ctx, "SELECT "+tt.expr+" AS v", mode)
				if err != nil {
					t.Fatal(err)
				}
				defer rows.Close()
				if !rows.Next() {
					t.Fatalf("no row: %v", rows.Err())
				}
				if got := rows.FieldDescriptions()[0].DataTypeOID; got != tt.oid {
					t.Errorf("type OID %d, want %d", got, tt.oid)
				}
				var got any
				switch tt.oid {
				case pgtype.NumericOID:
					var n pgtype.Numeric
					err = rows.Scan(&n)
					b, _ := n.MarshalJSON()
					got = string(b)
				case pgtype.JSONOID:
					var s string
					err = rows.Scan(&s)
					got = s
				default:
					vals, verr := rows.Values()
					err = verr
					got = vals[0]
				}
				if err != nil {
					t.Fatal(err)
				}
				if !reflect.DeepEqual(got, tt.want) {
					t.Errorf("got %#v, want %#v", got, tt.want)
				}
			})
		}
	}
	// Parameters of each type come back unchanged.
	params := []struct {
		cast string
		in   any
	}{
		{"SMALLINT", int16(-7)}, {"INTEGER", int32(1 << 30)}, {"BIGINT", int64(-1 << 60)},
		{"FLOAT", float32(2.5)}, {"DOUBLE", 1e-300}, {"VARCHAR", "a'b\"c"}, {"BOOLEAN", false},
		{"DATE", day}, {"TIMESTAMP", stamp},
	}
	for _, p := range params {
		t.Run("parameter/"+p.cast, func(t *testing.T) {
			var got any
			rows, err := c.Query(ctx, "SELECT CAST($1 AS "+p.cast+")", p.in)
			if err != nil {
				t.Fatal(err)
			}
			defer rows.Close()
			if !rows.Next() {
				t.Fatalf("no row: %v", rows.Err())
			}
			vals, err := rows.Values()
			if err != nil {
				t.Fatal(err)
			}
			got = vals[0]
			if !reflect.DeepEqual(got, p.in) {
				t.Errorf("got %#v, want %#v", got, p.in)
			}
		})
	}
	var n pgtype.Numeric
	if err := c.QueryRow(ctx, "SELECT $1::DECIMAL(10,3)", pgtype.Numeric{Int: big.NewInt(-12345), Exp: -3, Valid: true}).Scan(&n); err != nil {
		t.Fatal(err)
	}
	if f, _ := n.Float64Value(); f.Float64 != -12.345 {
		t.Errorf("numeric parameter came back as %v", f.Float64)
	}
}

func TestErrorCodes(t *testing.T) {
	ts := startServer(t, Config{})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 50)); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		sql  string
		code string
	}{
		{"SELEC 1", "42601"},
		{"SELECT * FROM no_such_table", "42P01"},
		{"SELECT no_such_column FROM points", "42703"},
		{"SELECT * FROM copse_train('m', 'points', target := 'no_such_column')", "22023"},
		{"SELECT copse_score('no_such_model', p) FROM points p", "22023"},
		{"SELECT * FROM copse_train('m', 'points', target := 'y', trees := -1)", "22023"},
	}
	for _, tt := range tests {
		for _, mode := range []pgx.QueryExecMode{pgx.QueryExecModeCacheStatement, pgx.QueryExecModeSimpleProtocol} {
			_, err := c.Exec(ctx, tt.sql, mode)
			if got := pgCode(err); got != tt.code {
				t.Errorf("%s (%v): SQLSTATE %q (%v), want %s", tt.sql, mode, got, err, tt.code)
			}
		}
	}
	// A failed call leaves the catalog as it was, and the session goes on.
	var models int64
	if err := c.QueryRow(ctx, "SELECT count(*) FROM copse_models()").Scan(&models); err != nil {
		t.Fatal(err)
	}
	if models != 0 {
		t.Errorf("%d models after failed trainings, want 0", models)
	}
}

// scores trains nothing; it reads every point's score from model m in id order.
func scores(ctx context.Context, c *pgx.Conn) ([]float64, error) {
	rows, err := c.Query(ctx, "SELECT copse_score('m', p) FROM points p WHERE id < $1 ORDER BY id", int64(300))
	if err != nil {
		return nil, err
	}
	return pgx.CollectRows(rows, pgx.RowTo[float64])
}

func TestConcurrentClientsScoreAlike(t *testing.T) {
	ts := startServer(t, Config{})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 1000)); err != nil {
		t.Fatal(err)
	}
	if _, err := c.Exec(ctx, "SELECT * FROM copse_train('m', 'SELECT x1, x2, y FROM points', target := 'y', trees := 10, seed := 7)"); err != nil {
		t.Fatal(err)
	}
	want, err := scores(ctx, c)
	if err != nil {
		t.Fatal(err)
	}
	if len(want) != 300 {
		t.Fatalf("%d scores, want 300", len(want))
	}
	const clients = 20
	var wg sync.WaitGroup
	errs := make(chan error, clients)
	for range clients {
		wg.Go(func() {
			cc, err := pgx.Connect(ctx, ts.dsn("analyst", ""))
			if err != nil {
				errs <- err
				return
			}
			defer cc.Close(ctx)
			for range 3 {
				got, err := scores(ctx, cc)
				if err != nil {
					errs <- err
					return
				}
				if !reflect.DeepEqual(got, want) {
					errs <- errors.New("a concurrent client got other scores")
					return
				}
			}
		})
	}
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
}

func TestPasswords(t *testing.T) {
	users, err := NewUsers(map[string]string{"analyst": "s3cret pass"})
	if err != nil {
		t.Fatal(err)
	}
	ts := startServer(t, Config{Users: users})
	ctx := context.Background()
	tests := []struct {
		name, user, password string
		ok                   bool
	}{
		{"right password", "analyst", "s3cret pass", true},
		{"wrong password", "analyst", "secret pass", false},
		{"missing password", "analyst", "", false},
		{"unknown user", "intruder", "s3cret pass", false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c, err := pgx.Connect(ctx, ts.dsn(tt.user, tt.password))
			if tt.ok {
				if err != nil {
					t.Fatal(err)
				}
				defer c.Close(ctx)
				var one int32
				if err := c.QueryRow(ctx, "SELECT 1").Scan(&one); err != nil || one != 1 {
					t.Fatalf("query after login: %v", err)
				}
				return
			}
			if err == nil {
				c.Close(ctx)
				t.Fatal("connected")
			}
			if tt.password != "" && pgCode(err) != "28P01" {
				t.Errorf("SQLSTATE %q (%v), want 28P01", pgCode(err), err)
			}
		})
	}
}

func TestConnectionLimit(t *testing.T) {
	ts := startServer(t, Config{MaxConnections: 2})
	ctx := context.Background()
	a, b := ts.connect(t), ts.connect(t)
	_, err := pgx.Connect(ctx, ts.dsn("analyst", ""))
	if pgCode(err) != "53300" {
		t.Fatalf("third client: SQLSTATE %q (%v), want 53300", pgCode(err), err)
	}
	a.Close(ctx)
	// The slot is freed when the session ends; the server notices the close a little
	// later, so try until it does.
	var c *pgx.Conn
	for range 100 {
		if c, err = pgx.Connect(ctx, ts.dsn("analyst", "")); err == nil {
			break
		}
		time.Sleep(10 * time.Millisecond)
	}
	if err != nil {
		t.Fatalf("after one client left: %v", err)
	}
	c.Close(ctx)
	b.Close(ctx)
}

// longTraining is a training that runs far longer than any test waits.
const longTraining = "SELECT * FROM copse_train('slow', 'SELECT x1, x2, y FROM points', target := 'y', trees := 100000, seed := 1)"

func modelCount(t *testing.T, c *pgx.Conn) int64 {
	t.Helper()
	var n int64
	if err := c.QueryRow(context.Background(), "SELECT count(*) FROM copse_models()").Scan(&n); err != nil {
		t.Fatal(err)
	}
	return n
}

func TestCancelRequestStopsTraining(t *testing.T) {
	ts := startServer(t, Config{})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 20000)); err != nil {
		t.Fatal(err)
	}
	before := modelCount(t, c)
	qctx, cancel := context.WithCancel(ctx)
	go func() {
		waitForJob(t, ts)
		// A CancelRequest on a new connection, with the session's key.
		if err := c.PgConn().CancelRequest(ctx); err != nil {
			t.Error(err)
		}
	}()
	_, err := c.Exec(qctx, longTraining)
	cancel()
	if pgCode(err) != "57014" {
		t.Fatalf("SQLSTATE %q (%v), want 57014", pgCode(err), err)
	}
	if after := modelCount(t, c); after != before {
		t.Errorf("%d models after the cancelled training, want %d", after, before)
	}
}

// waitForJob waits until a training on the host has grown its first trees.
func waitForJob(t *testing.T, ts *testServer) {
	for range 2000 {
		if jobs := ts.host.Jobs(); len(jobs) > 0 && jobs[0].TreesDone > 0 {
			return
		}
		time.Sleep(5 * time.Millisecond)
	}
	t.Error("no training started")
}

func TestStatementTimeout(t *testing.T) {
	ts := startServer(t, Config{StatementTimeout: 300 * time.Millisecond})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 20000)); err != nil {
		t.Fatal(err)
	}
	_, err := c.Exec(ctx, longTraining)
	var pe *pgconn.PgError
	if !errors.As(err, &pe) || pe.Code != "57014" || pe.Message != errStatementTimeout.Error() {
		t.Fatalf("got %v, want 57014 %q", err, errStatementTimeout)
	}
	if n := modelCount(t, c); n != 0 {
		t.Errorf("%d models after the timed-out training, want 0", n)
	}
}

func TestClientDroppingMidQuery(t *testing.T) {
	ts := startServer(t, Config{})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 20000)); err != nil {
		t.Fatal(err)
	}
	dropper, err := pgx.Connect(ctx, ts.dsn("analyst", ""))
	if err != nil {
		t.Fatal(err)
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		dropper.Exec(ctx, longTraining)
	}()
	waitForJob(t, ts)
	dropper.PgConn().Conn().Close() // the socket goes away without a Terminate
	<-done
	// The server notices and stops the training it was running for nobody.
	for i := 0; len(ts.host.Jobs()) > 0; i++ {
		if i == 3000 {
			t.Fatal("the dropped client's training still runs")
		}
		time.Sleep(5 * time.Millisecond)
	}
	other := ts.connect(t)
	var n int64
	if err := other.QueryRow(ctx, "SELECT count(*) FROM points").Scan(&n); err != nil || n != 20000 {
		t.Fatalf("another client after the drop: %d, %v", n, err)
	}
}

func TestGarbageDoesNotStopServer(t *testing.T) {
	ts := startServer(t, Config{})
	inputs := [][]byte{
		[]byte("GET / HTTP/1.1\r\nHost: x\r\n\r\n"),
		{0, 0, 0, 0},
		{0xff, 0xff, 0xff, 0xff, 0, 3, 0, 0},
		startupBytes("analyst"),
		append(startupBytes("analyst"), 'B', 0, 0, 0, 16, 0, 0, 0, 0, 0, 1, 0xff, 0xff, 0xff, 0xf0, 0, 0),
		append(startupBytes("analyst"), 'Z', 0, 0, 0, 4),
		append(startupBytes("analyst"), 'Q', 0x7f, 0xff, 0xff, 0xff),
		append(startupBytes("analyst"), 'P', 0, 0, 0, 6, 0, 0),
	}
	for i, in := range inputs {
		conn, err := net.Dial("tcp", ts.addr)
		if err != nil {
			t.Fatal(err)
		}
		conn.Write(in)
		conn.SetReadDeadline(time.Now().Add(time.Second))
		buf := make([]byte, 4096)
		for {
			if _, err := conn.Read(buf); err != nil {
				break
			}
		}
		conn.Close()
		c := ts.connect(t)
		var one int32
		if err := c.QueryRow(context.Background(), "SELECT 1").Scan(&one); err != nil {
			t.Fatalf("after input %d: %v", i, err)
		}
	}
}

// startupBytes is a protocol 3.0 startup message for user.
func startupBytes(user string) []byte {
	body := []byte{0, 3, 0, 0}
	body = append(body, "user\x00"+user+"\x00database\x00copse\x00\x00"...)
	n := len(body) + 4
	return append([]byte{byte(n >> 24), byte(n >> 16), byte(n >> 8), byte(n)}, body...)
}

func TestDrainCancelsLongStatements(t *testing.T) {
	ts := startServer(t, Config{DrainTimeout: 200 * time.Millisecond})
	c := ts.connect(t)
	ctx := context.Background()
	if _, err := c.Exec(ctx, fmt.Sprintf(trainingTable, 20000)); err != nil {
		t.Fatal(err)
	}
	errc := make(chan error, 1)
	go func() {
		_, err := c.Exec(ctx, longTraining)
		errc <- err
	}()
	waitForJob(t, ts)
	ts.stop() // returns once every session is gone and the database is closed
	if err := <-errc; err == nil {
		t.Fatal("the long training finished")
	} else if code := pgCode(err); code != "57P01" && code != "" {
		t.Errorf("SQLSTATE %q (%v), want 57P01 or a closed connection", code, err)
	}
}

func TestCheckListenAddr(t *testing.T) {
	tests := []struct {
		addr     string
		hasUsers bool
		ok       bool
	}{
		{"127.0.0.1:5433", false, true},
		{"[::1]:5433", false, true},
		{"0.0.0.0:5433", false, false},
		{"192.0.2.7:5433", false, false},
		{"0.0.0.0:5433", true, true},
	}
	for _, tt := range tests {
		a, err := net.ResolveTCPAddr("tcp", tt.addr)
		if err != nil {
			t.Fatal(err)
		}
		if err := CheckListenAddr(a, tt.hasUsers); (err == nil) != tt.ok {
			t.Errorf("%s (users %v): %v", tt.addr, tt.hasUsers, err)
		}
	}
}

// selfSigned makes a TLS certificate for 127.0.0.1, valid for the test's run.
func selfSigned(t *testing.T) *tls.Config {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1),
		Subject:      pkix.Name{CommonName: "copse test"},
		IPAddresses:  []net.IP{net.IPv4(127, 0, 0, 1)},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	return &tls.Config{Certificates: []tls.Certificate{{Certificate: [][]byte{der}, PrivateKey: key}}}
}

func TestTLSWithPassword(t *testing.T) {
	users, err := NewUsers(map[string]string{"analyst": "pw"})
	if err != nil {
		t.Fatal(err)
	}
	ts := startServer(t, Config{Users: users, TLS: selfSigned(t)})
	ctx := context.Background()
	c, err := pgx.Connect(ctx, ts.dsn("analyst", "pw")+" sslmode=require")
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close(ctx)
	if _, ok := c.PgConn().Conn().(*tls.Conn); !ok {
		t.Error("the session is not encrypted")
	}
	var one int32
	if err := c.QueryRow(ctx, "SELECT 1").Scan(&one); err != nil || one != 1 {
		t.Fatalf("query over TLS: %v", err)
	}
	// Without a certificate, a client that demands TLS is turned away.
	plain := startServer(t, Config{})
	if c, err := pgx.Connect(ctx, plain.dsn("analyst", "")+" sslmode=require"); err == nil {
		c.Close(ctx)
		t.Error("sslmode=require connected to a server without TLS")
	}
}

func TestReadPasswordFile(t *testing.T) {
	tests := []struct {
		name, text string
		mode       os.FileMode
		want       map[string]string
		wantErr    string
	}{
		{"two users", "# analysts\nana:one two\n\nben:x:y\n", 0o600, map[string]string{"ana": "one two", "ben": "x:y"}, ""},
		{"readable by others", "ana:pw\n", 0o644, nil, "can be read by other users"},
		{"no colon", "ana\n", 0o600, nil, "line 1: want NAME:PASSWORD"},
		{"twice", "ana:a\nana:b\n", 0o600, nil, `line 2: user "ana" given twice`},
		{"empty", "# nobody\n", 0o600, nil, "has no NAME:PASSWORD line"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			p := writeFile(t, "users", tt.text)
			if err := os.Chmod(p, tt.mode); err != nil {
				t.Fatal(err)
			}
			got, err := ReadPasswordFile(p)
			if tt.wantErr != "" {
				if err == nil || !strings.Contains(err.Error(), tt.wantErr) {
					t.Fatalf("error %v, want one containing %q", err, tt.wantErr)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(got, tt.want) {
				t.Errorf("got %v, want %v", got, tt.want)
			}
		})
	}
}

func TestPlaceholders(t *testing.T) {
	tests := []struct {
		q    string
		want []int
	}{
		{"SELECT $1, $2", []int{1, 2}},
		{"SELECT '$1', \"$2\", $3", []int{3}},
		{"SELECT $$ $1 $$, $tag$ $2 $tag$, $3", []int{3}},
		{"SELECT 1 -- $1\n, $2 /* $3 /* $4 */ $5 */ , $6", []int{2, 6}},
		{"SELECT 'it''s $1', $10", []int{10}},
		{"SELECT a$1 FROM t", nil},
	}
	for _, tt := range tests {
		var got []int
		for _, p := range placeholders(tt.q) {
			got = append(got, p.n)
		}
		if !reflect.DeepEqual(got, tt.want) {
			t.Errorf("%q: got %v, want %v", tt.q, got, tt.want)
		}
	}
	if got, want := castParams("SELECT '$1', $1 + $2", map[int]string{1: "VARCHAR"}), "SELECT '$1', CAST($1 AS VARCHAR) + $2"; got != want {
		t.Errorf("castParams: %q, want %q", got, want)
	}
}
