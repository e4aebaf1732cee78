package pgserve

import (
	"context"
	"fmt"
	"net"
	"os"
	"path/filepath"
	"testing"

	"github.com/jackc/pgx/v5"

	"github.com/copse-dev/copse/udf"
)

// testServer is a server on 127.0.0.1:0 over an in-memory copse host.
type testServer struct {
	host *udf.Host
	srv  *Server
	addr string
	stop func() // drains the server and waits for Serve to return
}

func startServer(t testing.TB, cfg Config) *testServer {
	t.Helper()
	ctx := context.Background()
	h, err := udf.Open(ctx, "")
	if err != nil {
		t.Fatal(err)
	}
	return startOn(t, h, cfg)
}

func startOn(t testing.TB, h *udf.Host, cfg Config) *testServer {
	t.Helper()
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	srv := New(h, cfg)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- srv.Serve(ctx, ln) }()
	ts := &testServer{host: h, srv: srv, addr: ln.Addr().String()}
	stopped := false
	ts.stop = func() {
		if stopped {
			return
		}
		stopped = true
		cancel()
		if err := <-done; err != nil {
			t.Errorf("serve: %v", err)
		}
		h.Close()
	}
	t.Cleanup(ts.stop)
	return ts
}

func (ts *testServer) dsn(user, password string) string {
	host, port, _ := net.SplitHostPort(ts.addr)
	dsn := fmt.Sprintf("host=%s port=%s user=%s dbname=copse sslmode=disable", host, port, user)
	if password != "" {
		dsn += " password='" + password + "'"
	}
	return dsn
}

func (ts *testServer) connect(t testing.TB) *pgx.Conn {
	t.Helper()
	c, err := pgx.Connect(context.Background(), ts.dsn("analyst", ""))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close(context.Background()) })
	return c
}

// writeFile writes a file with mode 0600 in a test directory.
func writeFile(t testing.TB, name, text string) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), name)
	if err := os.WriteFile(p, []byte(text), 0o600); err != nil {
		t.Fatal(err)
	}
	return p
}
