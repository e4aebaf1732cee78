package pgserve

import (
	"context"
	"crypto/rand"
	"crypto/subtle"
	"crypto/tls"
	"database/sql/driver"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"sync"
	"time"

	wire "github.com/jeroenrinzema/psql-wire"
	"github.com/jeroenrinzema/psql-wire/codes"
	psqlerr "github.com/jeroenrinzema/psql-wire/errors"
	"github.com/jeroenrinzema/psql-wire/pkg/buffer"
	"github.com/jeroenrinzema/psql-wire/pkg/types"

	"github.com/copse-dev/copse/udf"
)

// DefaultDrainTimeout is how long running statements may go on after shutdown begins
// before they are cancelled: long enough for a scoring query, short enough for a
// service manager's stop timeout (systemd waits 90 s by default).
const DefaultDrainTimeout = 30 * time.Second

// Config sets up a Server.
type Config struct {
	// Users who may connect; nil lets anyone on the listening address in, which Serve
	// allows on loopback addresses only.
	Users *Users
	// TLS, when set, is offered to clients that ask for it.
	TLS *tls.Config
	// MaxConnections caps concurrent sessions; 0 means no cap.
	MaxConnections int
	// StatementTimeout cancels statements that run longer; 0 means no limit.
	StatementTimeout time.Duration
	// DrainTimeout bounds the wait for running statements at shutdown; 0 means
	// DefaultDrainTimeout.
	DrainTimeout time.Duration
	// Logger receives connection-level events; nil discards them.
	Logger *slog.Logger
}

// Server serves one copse host to PostgreSQL clients. Each session has its own DuckDB
// connection from the host's pool; sessions run in parallel.
type Server struct {
	host *udf.Host
	cfg  Config
	log  *slog.Logger

	mu       sync.Mutex
	conns    map[*guardConn]bool
	sessions map[int32]*session // by process ID, for cancel requests
	slots    int
	nextPID  int32
	closing  bool

	running sync.WaitGroup // statements in progress
}

// New makes a server for h. The caller keeps h and closes it after Serve returns.
func New(h *udf.Host, cfg Config) *Server {
	if cfg.DrainTimeout <= 0 {
		cfg.DrainTimeout = DefaultDrainTimeout
	}
	log := cfg.Logger
	if log == nil {
		log = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	return &Server{host: h, cfg: cfg, log: log, conns: map[*guardConn]bool{}, sessions: map[int32]*session{}}
}

// CheckListenAddr refuses an address beyond loopback when no users are configured:
// without passwords anyone who reaches the port could read and change the database.
func CheckListenAddr(addr net.Addr, hasUsers bool) error {
	if hasUsers {
		return nil
	}
	tcp, ok := addr.(*net.TCPAddr)
	if ok && tcp.IP.IsLoopback() {
		return nil
	}
	return fmt.Errorf("pgserve: listening on %v, beyond loopback, needs a password file", addr)
}

// Serve accepts clients on ln until ctx is done, then drains: it stops accepting,
// lets running statements finish for up to DrainTimeout, cancels the rest, and
// closes every session. It returns once all sessions are gone.
func (s *Server) Serve(ctx context.Context, ln net.Listener) error {
	if err := CheckListenAddr(ln.Addr(), s.cfg.Users != nil); err != nil {
		return err
	}
	ws, err := wire.NewServer(s.parse,
		wire.Logger(s.log),
		wire.SessionAuthStrategy(s.authenticate),
		wire.BackendKeyData(s.backendKey),
		wire.CancelRequest(s.cancelRequest),
		wire.SessionMiddleware(s.openSession),
		wire.CloseConn(s.closeSession),
		wire.TxStatus(s.txStatus),
		wire.GlobalParameters(wire.Parameters{
			"DateStyle":                   "ISO, MDY",
			"integer_datetimes":           "on",
			"standard_conforming_strings": "on",
			"TimeZone":                    "UTC",
		}),
	)
	if err != nil {
		return fmt.Errorf("pgserve: %w", err)
	}
	gl := &guardListener{Listener: ln, srv: s}
	done := make(chan error, 1)
	go func() { done <- ws.Serve(gl) }()

	select {
	case err := <-done:
		s.stop(ws, gl)
		return err
	case <-ctx.Done():
	}
	s.log.Info("draining", "timeout", s.cfg.DrainTimeout)
	s.stop(ws, gl)
	<-done
	return nil
}

// stop ends serving: no new sessions, running statements get DrainTimeout, then are
// cancelled; finally all connections are closed and their sessions released.
func (s *Server) stop(ws *wire.Server, ln net.Listener) {
	s.mu.Lock()
	s.closing = true
	s.mu.Unlock()
	ln.Close()

	idle := make(chan struct{})
	go func() { s.running.Wait(); close(idle) }()
	select {
	case <-idle:
	case <-time.After(s.cfg.DrainTimeout):
		s.mu.Lock()
		for _, sess := range s.sessions {
			sess.cancel(errShutdown)
		}
		s.mu.Unlock()
		<-idle
	}
	s.mu.Lock()
	for g := range s.conns {
		g.Conn.Close()
	}
	s.mu.Unlock()
	ws.Close() // waits for the commands in progress, which are over by now
	ws.Wait()
}

// guardListener wraps each accepted connection in a guardConn. Closing it twice (by
// the drain and by the protocol library) is not an error.
type guardListener struct {
	net.Listener
	srv  *Server
	once sync.Once
}

func (l *guardListener) Close() error {
	var err error
	l.once.Do(func() { err = l.Listener.Close() })
	return err
}

func (l *guardListener) Accept() (net.Conn, error) {
	c, err := l.Listener.Accept()
	if err != nil {
		return nil, err
	}
	g := newGuard(c, l.srv)
	l.srv.mu.Lock()
	if l.srv.closing {
		l.srv.mu.Unlock()
		c.Close()
		return g, nil // the library sees a closed connection and drops it
	}
	l.srv.conns[g] = true
	l.srv.mu.Unlock()
	return g, nil
}

// forget releases what a closing connection held.
func (s *Server) forget(g *guardConn) {
	s.mu.Lock()
	defer s.mu.Unlock()
	delete(s.conns, g)
	if g.slot {
		s.slots--
		g.slot = false
	}
	if g.sess != nil {
		delete(s.sessions, g.sess.pid)
	}
}

// fatal writes a FATAL ErrorResponse with code and returns the error that ends the
// connection.
func fatal(w *buffer.Writer, code codes.Code, msg string) error {
	err := psqlerr.WithSeverity(psqlerr.WithCode(errors.New(msg), code), psqlerr.LevelFatal)
	wire.WriteUnterminatedError(w, err)
	return err
}

// authenticate takes a connection slot, checks the password when users are set, and
// creates the session.
func (s *Server) authenticate(ctx context.Context, w *buffer.Writer, r *buffer.Reader) (context.Context, error) {
	g := guardOf(ctx, wire.RemoteAddress(ctx))
	if g == nil {
		return ctx, errors.New("pgserve: connection not accepted by this server")
	}
	s.mu.Lock()
	switch {
	case s.closing:
		s.mu.Unlock()
		return ctx, fatal(w, stateAdminShutdown, "the server is shutting down")
	case s.cfg.MaxConnections > 0 && s.slots >= s.cfg.MaxConnections:
		s.mu.Unlock()
		return ctx, fatal(w, stateTooMany, fmt.Sprintf("sorry, too many clients already (the limit is %d)", s.cfg.MaxConnections))
	}
	s.slots++
	g.slot = true
	s.mu.Unlock()

	user := wire.ClientParameters(ctx)[wire.ParamUsername]
	if s.cfg.Users != nil {
		if err := s.scram(user, w, r); err != nil {
			return ctx, err
		}
	}
	w.Start(types.ServerAuth)
	w.AddInt32(0) // AuthenticationOk
	if err := w.End(); err != nil {
		return ctx, err
	}

	sess := &session{srv: s, guard: g, user: user}
	var key [4]byte
	rand.Read(key[:])
	sess.secret = int32(binary.BigEndian.Uint32(key[:]))
	s.mu.Lock()
	s.nextPID++
	sess.pid = s.nextPID
	s.sessions[sess.pid] = sess
	g.sess = sess
	s.mu.Unlock()
	return context.WithValue(ctx, sessionKey{}, sess), nil
}

// SASL authentication codes and mechanism (PostgreSQL protocol, "SASL Authentication").
const (
	authSASL         = 10
	authSASLContinue = 11
	authSASLFinal    = 12
	mechSCRAM        = "SCRAM-SHA-256"
)

// scram runs a SCRAM-SHA-256 exchange for user. Unknown users go through the same
// exchange with a decoy verifier and fail at the end, like a wrong password.
func (s *Server) scram(user string, w *buffer.Writer, r *buffer.Reader) error {
	v, known := s.cfg.Users.byName[user]
	if !known {
		v = s.cfg.Users.decoy
	}
	x := &scramExchange{v: v, known: known}
	w.Start(types.ServerAuth)
	w.AddInt32(authSASL)
	w.AddString(mechSCRAM)
	w.AddNullTerminate()
	w.AddNullTerminate()
	if err := w.End(); err != nil {
		return err
	}
	proto := func(msg string) error { return fatal(w, stateProtocol, msg) }
	t, _, err := r.ReadTypedMsg()
	if err != nil {
		return err
	}
	if t != types.ClientPassword {
		return proto("expected a SASL initial response")
	}
	mech, err := r.GetString()
	if err != nil || mech != mechSCRAM {
		return proto(fmt.Sprintf("SASL mechanism %q is not offered; use %s", mech, mechSCRAM))
	}
	n, err := r.GetInt32()
	if err != nil || n < 0 {
		return proto("malformed SASL initial response")
	}
	data, err := r.GetBytes(int(n))
	if err != nil {
		return proto("malformed SASL initial response")
	}
	serverFirst, err := x.first(string(data))
	if err != nil {
		return proto(err.Error())
	}
	w.Start(types.ServerAuth)
	w.AddInt32(authSASLContinue)
	w.AddBytes([]byte(serverFirst))
	if err := w.End(); err != nil {
		return err
	}
	t, _, err = r.ReadTypedMsg()
	if err != nil {
		return err
	}
	if t != types.ClientPassword {
		return proto("expected a SASL response")
	}
	final, ok, err := x.final(string(r.Msg))
	if err != nil {
		return proto(err.Error())
	}
	if !ok {
		s.log.Info("password authentication failed", "user", user)
		return fatal(w, stateAuthFailed, fmt.Sprintf("password authentication failed for user %q", user))
	}
	w.Start(types.ServerAuth)
	w.AddInt32(authSASLFinal)
	w.AddBytes([]byte(final))
	return w.End()
}

type sessionKey struct{}

func sessionOf(ctx context.Context) *session {
	sess, _ := ctx.Value(sessionKey{}).(*session)
	return sess
}

func (s *Server) backendKey(ctx context.Context) (int32, int32) {
	if sess := sessionOf(ctx); sess != nil {
		return sess.pid, sess.secret
	}
	return 0, 0
}

// cancelRequest stops the running statement of the session with that process ID, if
// the secret matches.
func (s *Server) cancelRequest(ctx context.Context, pid, secret int32) error {
	s.mu.Lock()
	sess := s.sessions[pid]
	s.mu.Unlock()
	if sess == nil {
		return nil
	}
	var a, b [4]byte
	binary.BigEndian.PutUint32(a[:], uint32(sess.secret))
	binary.BigEndian.PutUint32(b[:], uint32(secret))
	if subtle.ConstantTimeCompare(a[:], b[:]) == 1 {
		sess.cancel(errCancelRequest)
	}
	return nil
}

// openSession gives an authenticated session its DuckDB connection.
func (s *Server) openSession(ctx context.Context) (context.Context, error) {
	sess := sessionOf(ctx)
	if sess == nil {
		return ctx, errors.New("pgserve: session without authentication")
	}
	conn, err := s.host.DB().Conn(ctx)
	if err != nil {
		return ctx, fmt.Errorf("pgserve: connect: %w", err)
	}
	sess.conn = conn
	return ctx, nil
}

// closeSession discards the session's DuckDB connection rather than returning it to
// the pool: it may hold the session's settings, temporary tables or an open
// transaction, which the next session must not inherit.
func (s *Server) closeSession(ctx context.Context) error {
	sess := sessionOf(ctx)
	if sess == nil || sess.conn == nil {
		return nil
	}
	sess.conn.Raw(func(any) error { return driver.ErrBadConn }) // closes it
	sess.conn.Close()                                           // releases the *sql.Conn
	return nil
}

func (s *Server) txStatus(ctx context.Context) types.ServerStatus {
	if sess := sessionOf(ctx); sess != nil {
		return sess.txStatus()
	}
	return types.ServerIdle
}
