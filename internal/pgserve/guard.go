package pgserve

import (
	"context"
	"crypto/tls"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"net"
	"sync"
	"time"
)

// Startup codes of the untyped first message (PostgreSQL protocol, "Message Formats").
const (
	codeProtocol3   = 196608   // 3.0
	codeCancel      = 80877102 // CancelRequest
	codeSSLRequest  = 80877103
	codeGSSENCReq   = 80877104
	maxStartupLen   = 10000   // PostgreSQL's own limit on a startup packet
	maxMessageLen   = 1 << 26 // 64 MiB: no statement or parameter set of ours comes near
	tlsHandshakeMax = 10 * time.Second
)

// errBadMessage ends a connection whose bytes do not follow the protocol.
var errBadMessage = errors.New("invalid frontend message")

// guardConn sits between a client's socket and the protocol library. It negotiates
// TLS itself (so the server knows which sessions are encrypted), and it passes on only
// whole frontend messages whose framing it has checked, so that malformed bytes end
// the connection with an error instead of reaching code that trusts lengths.
type guardConn struct {
	net.Conn // the socket; Close, deadlines and addresses go to it
	srv      *Server
	rw       io.ReadWriter // the socket, or the TLS stream over it
	tls      bool
	started  bool   // the startup message has been passed on
	pending  []byte // checked bytes not yet read by the library
	failed   error

	closeOnce sync.Once
	slot      bool     // holds one of the MaxConnections slots
	sess      *session // set once authenticated
}

func newGuard(c net.Conn, s *Server) *guardConn {
	return &guardConn{Conn: c, srv: s, rw: c}
}

// guardAddr is the remote address the protocol library sees; it leads back to the
// guard, so authentication can find the connection it runs on.
type guardAddr struct {
	net.Addr
	g *guardConn
}

func (g *guardConn) RemoteAddr() net.Addr { return &guardAddr{Addr: g.Conn.RemoteAddr(), g: g} }

func guardOf(ctx context.Context, addr net.Addr) *guardConn {
	if a, ok := addr.(*guardAddr); ok {
		return a.g
	}
	return nil
}

func (g *guardConn) Write(p []byte) (int, error) { return g.rw.Write(p) }

func (g *guardConn) Read(p []byte) (int, error) {
	for len(g.pending) == 0 {
		if g.failed != nil {
			return 0, g.failed
		}
		var err error
		if !g.started {
			err = g.nextStartup()
		} else {
			err = g.nextMessage()
		}
		if err != nil {
			g.failed = err
			if errors.Is(err, errBadMessage) {
				g.rejectMalformed(err)
			}
		}
	}
	n := copy(p, g.pending)
	g.pending = g.pending[n:]
	return n, nil
}

func (g *guardConn) Close() error {
	g.closeOnce.Do(func() { g.srv.forget(g) })
	return g.Conn.Close()
}

// nextStartup reads one untyped startup message. TLS and GSS encryption requests are
// answered here and never reach the library.
func (g *guardConn) nextStartup() error {
	var head [8]byte
	if _, err := io.ReadFull(g.rw, head[:]); err != nil {
		return err
	}
	n := int(binary.BigEndian.Uint32(head[:4]))
	code := binary.BigEndian.Uint32(head[4:])
	if n < 8 || n > maxStartupLen {
		return fmt.Errorf("%w: startup message of %d bytes", errBadMessage, n)
	}
	body := make([]byte, n)
	copy(body, head[:])
	if _, err := io.ReadFull(g.rw, body[8:]); err != nil {
		return err
	}
	switch code {
	case codeSSLRequest:
		if n != 8 {
			return fmt.Errorf("%w: TLS request of %d bytes", errBadMessage, n)
		}
		return g.startTLS()
	case codeGSSENCReq:
		_, err := g.rw.Write([]byte{'N'})
		return err
	case codeCancel:
		if n != 16 {
			return fmt.Errorf("%w: cancel request of %d bytes", errBadMessage, n)
		}
	case codeProtocol3:
		if body[n-1] != 0 {
			return fmt.Errorf("%w: startup parameters not terminated", errBadMessage)
		}
	default:
		if code>>16 != 3 {
			return fmt.Errorf("%w: unsupported protocol version %d.%d", errBadMessage, code>>16, code&0xffff)
		}
	}
	g.started = true
	g.pending = body
	return nil
}

// startTLS answers a TLS request: 'S' and a handshake when the server has a
// certificate, else 'N' (the client then goes on in the clear or gives up).
func (g *guardConn) startTLS() error {
	cfg := g.srv.cfg.TLS
	if cfg == nil || g.tls {
		_, err := g.rw.Write([]byte{'N'})
		return err
	}
	if _, err := g.rw.Write([]byte{'S'}); err != nil {
		return err
	}
	tc := tls.Server(g.Conn, cfg)
	ctx, cancel := context.WithTimeout(context.Background(), tlsHandshakeMax)
	defer cancel()
	if err := tc.HandshakeContext(ctx); err != nil {
		return fmt.Errorf("tls handshake: %w", err)
	}
	g.rw, g.tls = tc, true
	return nil
}

// nextMessage reads one typed message and checks its framing.
func (g *guardConn) nextMessage() error {
	var head [5]byte
	if _, err := io.ReadFull(g.rw, head[:]); err != nil {
		return err
	}
	n := int(binary.BigEndian.Uint32(head[1:])) // counts itself, not the type byte
	if n < 4 || n-4 > maxMessageLen {
		return fmt.Errorf("%w: message %q of %d bytes", errBadMessage, head[0], n)
	}
	msg := make([]byte, 1+n)
	copy(msg, head[:])
	if _, err := io.ReadFull(g.rw, msg[5:]); err != nil {
		return err
	}
	if err := checkMessage(head[0], msg[5:]); err != nil {
		return err
	}
	g.pending = msg
	return nil
}

// checkMessage checks the inner lengths of the frontend messages that carry them.
func checkMessage(typ byte, body []byte) error {
	switch typ {
	case 'B':
		return checkBind(body)
	case 'Q', 'P', 'D', 'C', 'E', 'S', 'H', 'X', 'p', 'd', 'c', 'f', 'F':
		return nil
	}
	return fmt.Errorf("%w: unknown message type %q", errBadMessage, typ)
}

// checkBind walks a Bind message: portal and statement names, parameter formats,
// parameter values (length -1 is NULL) and result formats, ending exactly at the end.
func checkBind(b []byte) error {
	bad := func(what string) error { return fmt.Errorf("%w: Bind %s", errBadMessage, what) }
	for range 2 { // portal, statement
		i := indexZero(b)
		if i < 0 {
			return bad("name not terminated")
		}
		b = b[i+1:]
	}
	count := func() (int, bool) {
		if len(b) < 2 {
			return 0, false
		}
		n := int(binary.BigEndian.Uint16(b))
		b = b[2:]
		return n, true
	}
	nf, ok := count()
	if !ok || len(b) < 2*nf {
		return bad("parameter formats cut short")
	}
	b = b[2*nf:]
	np, ok := count()
	if !ok {
		return bad("parameter count cut short")
	}
	if nf > 1 && nf != np {
		return bad("has a format count that is neither 0, 1 nor the parameter count")
	}
	for range np {
		if len(b) < 4 {
			return bad("parameter length cut short")
		}
		l := int32(binary.BigEndian.Uint32(b))
		b = b[4:]
		if l == -1 {
			continue
		}
		if l < 0 || int(l) > len(b) {
			return bad("parameter length out of range")
		}
		b = b[l:]
	}
	nr, ok := count()
	if !ok || len(b) != 2*nr {
		return bad("result formats do not fill the message")
	}
	return nil
}

func indexZero(b []byte) int {
	for i, c := range b {
		if c == 0 {
			return i
		}
	}
	return -1
}

// rejectMalformed tells the client why its connection ends (a FATAL ErrorResponse
// with SQLSTATE 08P01), as far as the socket still takes it.
func (g *guardConn) rejectMalformed(err error) {
	msg := []byte{'E', 0, 0, 0, 0}
	for _, f := range [][2]string{{"S", "FATAL"}, {"V", "FATAL"}, {"C", string(stateProtocol)}, {"M", err.Error()}} {
		msg = append(msg, f[0][0])
		msg = append(msg, f[1]...)
		msg = append(msg, 0)
	}
	msg = append(msg, 0)
	binary.BigEndian.PutUint32(msg[1:], uint32(len(msg)-1))
	g.Conn.SetWriteDeadline(time.Now().Add(time.Second))
	g.rw.Write(msg)
}
