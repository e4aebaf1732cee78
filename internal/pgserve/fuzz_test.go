package pgserve

import (
	"context"
	"encoding/binary"
	"net"
	"sync"
	"testing"
	"time"

	"github.com/copse-dev/copse/udf"
)

// pipeListener hands net.Pipe ends to the server, so a fuzz input needs no socket.
type pipeListener struct {
	conns  chan net.Conn
	closed chan struct{}
	once   sync.Once
}

func newPipeListener() *pipeListener {
	return &pipeListener{conns: make(chan net.Conn), closed: make(chan struct{})}
}

func (l *pipeListener) Accept() (net.Conn, error) {
	select {
	case c := <-l.conns:
		return c, nil
	case <-l.closed:
		return nil, net.ErrClosed
	}
}

func (l *pipeListener) Close() error {
	l.once.Do(func() { close(l.closed) })
	return nil
}

// Addr is loopback, as the server demands without passwords.
func (l *pipeListener) Addr() net.Addr { return &net.TCPAddr{IP: net.IPv4(127, 0, 0, 1), Port: 5433} }

// msg frames a typed frontend message.
func msg(typ byte, body ...[]byte) []byte {
	var b []byte
	for _, p := range body {
		b = append(b, p...)
	}
	out := []byte{typ, 0, 0, 0, 0}
	binary.BigEndian.PutUint32(out[1:], uint32(len(b)+4))
	return append(out, b...)
}

func cstr(s string) []byte { return append([]byte(s), 0) }

func u16(n int) []byte { return []byte{byte(n >> 8), byte(n)} }

func u32(n int) []byte { return []byte{byte(n >> 24), byte(n >> 16), byte(n >> 8), byte(n)} }

// FuzzMessages sends arbitrary bytes, after a valid startup message or instead of it,
// through the whole server: guard, protocol library, statement handling. The server
// must answer or hang up, never crash.
func FuzzMessages(f *testing.F) {
	start := startupBytes("fuzz")
	seeds := [][]byte{
		append(start, msg('Q', cstr("SELECT 1 AS one, 'a' AS two"))...),
		append(start, msg('Q', cstr("SELECT 1; SELECT [1, 2]; SELEC"))...),
		concat(start,
			msg('P', cstr("s1"), cstr("SELECT $1::INTEGER + 1, $2"), u16(1), u32(23)),
			msg('D', []byte{'S'}, cstr("s1")),
			msg('B', cstr(""), cstr("s1"), u16(1), u16(1), u16(2), u32(4), u32(41), u32(3), []byte("abc"), u16(0)),
			msg('E', cstr(""), u32(0)),
			msg('C', []byte{'S'}, cstr("s1")),
			msg('S')),
		concat(start, msg('B', cstr(""), cstr("nope"), u16(0), u16(1), u32(0xfffffff0), u16(0)), msg('S')),
		concat(start, msg('p', cstr("SCRAM-SHA-256"), u32(5), []byte("n,,r=")), msg('X')),
		{0, 0, 0, 16, 0x04, 0xd2, 0x16, 0x2e, 0, 0, 0, 1, 0, 0, 0, 2}, // cancel request
		{0, 0, 0, 8, 0x04, 0xd2, 0x16, 0x2f},                          // TLS request
		concat(start, msg('H'), msg('X')),
	}
	for _, s := range seeds {
		f.Add(s)
	}
	ctx := context.Background()
	h, err := udf.Open(ctx, "")
	if err != nil {
		f.Fatal(err)
	}
	// Whatever statements the fuzzer writes, they reach no file and no network.
	if _, err := h.DB().ExecContext(ctx, "SET enable_external_access = false"); err != nil {
		f.Fatal(err)
	}
	srv := New(h, Config{StatementTimeout: time.Second, DrainTimeout: time.Second})
	ln := newPipeListener()
	sctx, stop := context.WithCancel(ctx)
	done := make(chan error, 1)
	go func() { done <- srv.Serve(sctx, ln) }()
	f.Cleanup(func() {
		stop()
		<-done
		h.Close()
	})

	f.Fuzz(func(t *testing.T, in []byte) {
		client, server := net.Pipe()
		select {
		case ln.conns <- server:
		case <-time.After(5 * time.Second):
			t.Fatal("the server stopped accepting")
		}
		drained := make(chan struct{})
		go func() {
			defer close(drained)
			buf := make([]byte, 4096)
			for {
				if _, err := client.Read(buf); err != nil {
					return
				}
			}
		}()
		client.SetWriteDeadline(time.Now().Add(2 * time.Second))
		client.Write(in)
		client.Close()
		<-drained
	})
}

func concat(parts ...[]byte) []byte {
	var out []byte
	for _, p := range parts {
		out = append(out, p...)
	}
	return out
}

// TestCheckBind walks Bind messages; the protocol library trusts their inner lengths
// (a negative one other than -1 would make it slice out of range).
func TestCheckBind(t *testing.T) {
	tests := []struct {
		name string
		body []byte
		ok   bool
	}{
		{"no parameters", concat(cstr(""), cstr("s"), u16(0), u16(0), u16(0)), true},
		{"one text parameter", concat(cstr(""), cstr("s"), u16(0), u16(1), u32(2), []byte("42"), u16(1), u16(0)), true},
		{"NULL parameter", concat(cstr(""), cstr("s"), u16(0), u16(1), u32(0xffffffff), u16(0)), true},
		{"negative length", concat(cstr(""), cstr("s"), u16(0), u16(1), u32(0xfffffff0), u16(0)), false},
		{"length past the end", concat(cstr(""), cstr("s"), u16(0), u16(1), u32(100), []byte("42"), u16(0)), false},
		{"unterminated name", []byte("portal"), false},
		{"trailing bytes", concat(cstr(""), cstr("s"), u16(0), u16(0), u16(0), []byte{1}), false},
		{"format count mismatch", concat(cstr(""), cstr("s"), u16(2), u16(0), u16(0), u16(1), u32(1), []byte("x"), u16(0)), false},
	}
	for _, tt := range tests {
		if err := checkBind(tt.body); (err == nil) != tt.ok {
			t.Errorf("%s: %v", tt.name, err)
		}
	}
}
