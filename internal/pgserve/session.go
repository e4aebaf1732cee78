package pgserve

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"errors"
	"fmt"
	"strings"
	"sync"
	"time"

	"github.com/duckdb/duckdb-go/v2"
	"github.com/jackc/pgx/v5/pgtype"
	wire "github.com/jeroenrinzema/psql-wire"
	psqlerr "github.com/jeroenrinzema/psql-wire/errors"
	"github.com/jeroenrinzema/psql-wire/pkg/types"

	"github.com/copse-dev/copse/internal/sqlsplit"
)

// session is one client's state: its DuckDB connection and the statement running on
// it, which a cancel request, the statement timeout or shutdown may stop.
type session struct {
	srv    *Server
	guard  *guardConn // the client's connection
	user   string
	pid    int32
	secret int32
	conn   *sql.Conn

	mu      sync.Mutex
	stop    context.CancelCauseFunc // the running statement's, nil when idle
	inTx    bool                    // inside BEGIN ... COMMIT
	txError bool                    // a statement failed inside the transaction
}

// cancel stops the running statement, if any, giving cause as the reason.
func (s *session) cancel(cause error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.stop != nil {
		s.stop(cause)
	}
}

func (s *session) txStatus() types.ServerStatus {
	s.mu.Lock()
	defer s.mu.Unlock()
	switch {
	case s.inTx && s.txError:
		return types.ServerTransactionFailed
	case s.inTx:
		return types.ServerTransactionBlock
	}
	return types.ServerIdle
}

// kind says how a statement's outcome goes back to the client.
type kind int

const (
	kindRows    kind = iota // a result set: RowDescription, DataRows, "SELECT n"
	kindChanged             // INSERT, UPDATE, DELETE without RETURNING: "INSERT 0 n" and the like
	kindCommand             // everything else: only a command tag
)

// statement is a prepared statement as the client sees it.
type statement struct {
	sess   *session
	sql    string   // what DuckDB runs: the client's text, with casts added where needed
	params []uint32 // parameter types announced to the client
	cols   []column
	kind   kind
	tag    string // command tag (kindCommand) or its prefix (kindChanged)
}

// description is what DuckDB tells about a statement it has prepared.
type description struct {
	stmtType   duckdb.StmtType
	paramTypes []duckdb.Type
	colNames   []string
	colTypes   []duckdb.Type
}

// describe prepares q on the session's connection to learn its parameters and result
// columns, without running it.
func (s *session) describe(ctx context.Context, q string) (*description, error) {
	var d description
	err := s.conn.Raw(func(dc any) error {
		pc, ok := dc.(driver.ConnPrepareContext)
		if !ok {
			return errors.New("pgserve: driver connection cannot prepare")
		}
		st, err := pc.PrepareContext(ctx, q)
		if err != nil {
			return err
		}
		defer st.Close()
		ds, ok := st.(*duckdb.Stmt)
		if !ok {
			return errors.New("pgserve: not a DuckDB statement")
		}
		if d.stmtType, err = ds.StatementType(); err != nil {
			return err
		}
		for i := 1; i <= ds.NumInput(); i++ {
			t, err := ds.ParamType(i)
			if err != nil {
				return err
			}
			d.paramTypes = append(d.paramTypes, t)
		}
		n, err := ds.ColumnCount()
		if err != nil {
			return err
		}
		for i := range n {
			name, err := ds.ColumnName(i)
			if err != nil {
				return err
			}
			t, err := ds.ColumnType(i)
			if err != nil {
				return err
			}
			d.colNames = append(d.colNames, name)
			d.colTypes = append(d.colTypes, t)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return &d, nil
}

// unresolved reports whether DuckDB left some result column untyped, which happens
// when it cannot infer a parameter's type.
func (d *description) unresolved() bool {
	for _, t := range d.colTypes {
		if t == duckdb.TYPE_INVALID {
			return true
		}
	}
	return false
}

// prepare builds the statement for q. Parameter types come from the client where it
// declared them, else from DuckDB; a parameter neither gives a type to is text, as in
// PostgreSQL, and is cast so that DuckDB can type the result.
func (s *session) prepare(ctx context.Context, q string, declared []uint32) (*statement, error) {
	d, err := s.describe(ctx, q)
	if err != nil {
		return nil, err
	}
	params := make([]uint32, len(d.paramTypes))
	casts := map[int]string{}
	for i, t := range d.paramTypes {
		inferred := paramOIDFor(t)
		switch {
		case i < len(declared) && declared[i] != 0:
			params[i] = declared[i]
			if inferred == 0 {
				casts[i+1] = duckTypeFor(declared[i])
			}
		case inferred != 0:
			params[i] = inferred
		default:
			params[i] = pgtype.TextOID
			casts[i+1] = "VARCHAR"
		}
	}
	if len(casts) > 0 {
		q = castParams(q, casts)
		if d, err = s.describe(ctx, q); err != nil {
			return nil, err
		}
	}
	if d.unresolved() {
		return nil, psqlerr.WithCode(errors.New("could not determine the result columns; give the parameters types with casts, such as $1::INTEGER"), stateIndeterminate)
	}
	st := &statement{sess: s, sql: q, params: params}
	for i, name := range d.colNames {
		st.cols = append(st.cols, columnFor(name, d.colTypes[i]))
	}
	st.kind, st.tag = classify(q, d)
	if st.kind != kindRows {
		st.cols = nil
	}
	return st, nil
}

// stateIndeterminate is SQLSTATE 42P18, indeterminate_datatype.
const stateIndeterminate = "42P18"

// classify picks how a statement reports back. DuckDB answers data-changing and
// schema statements with a lone "Count" or "Success" column that PostgreSQL clients do
// not expect; those become command tags.
func classify(q string, d *description) (kind, string) {
	bookkeeping := len(d.colNames) == 1 && (d.colNames[0] == "Count" || d.colNames[0] == "Success")
	switch d.stmtType {
	case duckdb.STATEMENT_TYPE_INSERT:
		if bookkeeping {
			return kindChanged, "INSERT 0 "
		}
		return kindRows, "INSERT 0 "
	case duckdb.STATEMENT_TYPE_UPDATE:
		if bookkeeping {
			return kindChanged, "UPDATE "
		}
		return kindRows, "UPDATE "
	case duckdb.STATEMENT_TYPE_DELETE:
		if bookkeeping {
			return kindChanged, "DELETE "
		}
		return kindRows, "DELETE "
	case duckdb.STATEMENT_TYPE_SELECT, duckdb.STATEMENT_TYPE_EXPLAIN, duckdb.STATEMENT_TYPE_PRAGMA,
		duckdb.STATEMENT_TYPE_CALL, duckdb.STATEMENT_TYPE_RELATION, duckdb.STATEMENT_TYPE_EXECUTE:
		if len(d.colNames) > 0 {
			return kindRows, "SELECT "
		}
	}
	if len(d.colNames) > 0 && !bookkeeping {
		return kindRows, "SELECT "
	}
	return kindCommand, firstKeyword(q)
}

// firstKeyword is the statement's first word in upper case, past comments.
func firstKeyword(q string) string {
	for _, st := range sqlsplit.Split(q) {
		f := strings.Fields(strings.TrimLeft(st.SQL, "( \t\r\n"))
		if len(f) > 0 {
			w := strings.ToUpper(strings.TrimRight(f[0], ";("))
			return w
		}
	}
	return ""
}

// parse turns a query into prepared statements. A simple query may hold several
// statements; each after the first is prepared only when the one before it has run,
// since it may use what that one created.
func (srv *Server) parse(ctx context.Context, q wire.Query) (wire.PreparedStatements, error) {
	sess := sessionOf(ctx)
	if sess == nil {
		return nil, errors.New("pgserve: no session")
	}
	var texts []string
	for _, st := range sqlsplit.Split(q.Query) {
		if st.SQL != "" {
			texts = append(texts, st.SQL)
		}
	}
	if len(texts) == 0 {
		return wire.Prepared(wire.NewStatement(func(ctx context.Context, w wire.DataWriter, _ []wire.Parameter) error {
			return w.Empty()
		})), nil
	}
	if !q.SimpleQuery {
		if len(texts) > 1 {
			return nil, psqlerr.WithCode(errors.New("cannot insert multiple commands into a prepared statement"), stateSyntax)
		}
		st, err := sess.prepare(ctx, q.Query, q.ParameterOIDs)
		if err != nil {
			return nil, withState(ctx, err)
		}
		return wire.Prepared(st.wire()), nil
	}
	first, err := sess.prepare(ctx, texts[0], nil)
	if err != nil {
		return nil, withState(ctx, err)
	}
	chain := make([]*lazy, len(texts))
	for i, text := range texts {
		chain[i] = &lazy{sess: sess, sql: text}
	}
	chain[0].st = first
	out := make(wire.PreparedStatements, len(texts))
	for i, lz := range chain {
		var next *lazy
		if i+1 < len(chain) {
			next = chain[i+1]
		}
		fn := func(ctx context.Context, w wire.DataWriter, params []wire.Parameter) error {
			if lz.err != nil {
				return withState(ctx, lz.err)
			}
			if err := lz.st.run(ctx, w, params); err != nil {
				return err
			}
			if next != nil {
				next.prepare(ctx)
			}
			return nil
		}
		var opts []wire.PreparedOptionFn
		if i == 0 {
			opts = first.options()
		}
		out[i] = wire.NewStatement(fn, opts...)
		lz.self = out[i]
	}
	return out, nil
}

// lazy is a statement of a multi-statement simple query, prepared once the statement
// before it has run.
type lazy struct {
	sess *session
	sql  string
	self *wire.PreparedStatement
	st   *statement
	err  error
}

// prepare prepares the statement and gives the library its columns, which it reads
// only when it comes to this statement.
func (lz *lazy) prepare(ctx context.Context) {
	lz.st, lz.err = lz.sess.prepare(ctx, lz.sql, nil)
	if lz.err == nil {
		wire.WithColumns(lz.st.columns())(lz.self)
	}
}

// wire is the statement as the protocol library takes it.
func (st *statement) wire() *wire.PreparedStatement {
	return wire.NewStatement(st.run, st.options()...)
}

func (st *statement) options() []wire.PreparedOptionFn {
	return []wire.PreparedOptionFn{wire.WithParameters(st.params), wire.WithColumns(st.columns())}
}

// typeWidths are the fixed sizes PostgreSQL reports for its fixed-width types; the
// rest are -1 (variable).
var typeWidths = map[uint32]int16{
	pgtype.BoolOID: 1, pgtype.Int2OID: 2, pgtype.Int4OID: 4, pgtype.Int8OID: 8,
	pgtype.Float4OID: 4, pgtype.Float8OID: 8, pgtype.DateOID: 4, pgtype.TimestampOID: 8,
	pgtype.TimestamptzOID: 8, pgtype.TimeOID: 8, pgtype.IntervalOID: 16, pgtype.UUIDOID: 16,
}

func (st *statement) columns() wire.Columns {
	out := make(wire.Columns, len(st.cols))
	for i, c := range st.cols {
		w, ok := typeWidths[c.oid]
		if !ok {
			w = -1
		}
		out[i] = wire.Column{Name: c.name, Oid: c.oid, Width: w, TypeModifier: -1}
	}
	return out
}

// run executes the statement with the client's parameters and streams its outcome.
func (st *statement) run(ctx context.Context, w wire.DataWriter, params []wire.Parameter) error {
	args, err := st.args(params)
	if err != nil {
		return err
	}
	return st.sess.execute(ctx, st, w, args)
}

// args turns the client's parameter values into values DuckDB binds.
func (st *statement) args(params []wire.Parameter) ([]any, error) {
	if len(params) != len(st.params) {
		return nil, psqlerr.WithCode(fmt.Errorf("bind message supplies %d parameters, but prepared statement requires %d", len(params), len(st.params)), stateProtocol)
	}
	out := make([]any, len(params))
	for i, p := range params {
		if p.Value() == nil {
			continue // NULL
		}
		v, err := paramValue(p, st.params[i])
		if err != nil {
			return nil, psqlerr.WithCode(fmt.Errorf("parameter $%d: %w", i+1, err), stateBinaryParam)
		}
		out[i] = v
	}
	return out, nil
}

// stateBinaryParam is SQLSTATE 22P03, invalid_binary_representation.
const stateBinaryParam = "22P03"

// paramValue decodes one parameter of type oid. Values of types DuckDB has no binder
// for are passed as text, which DuckDB casts to the parameter's type.
func paramValue(p wire.Parameter, oid uint32) (any, error) {
	switch oid {
	case pgtype.BoolOID, pgtype.Int2OID, pgtype.Int4OID, pgtype.Int8OID, pgtype.Float4OID,
		pgtype.Float8OID, pgtype.NumericOID, pgtype.DateOID, pgtype.TimestampOID,
		pgtype.TimestamptzOID, pgtype.ByteaOID, pgtype.UUIDOID, pgtype.IntervalOID:
		v, err := p.Scan(oid)
		if err != nil {
			return nil, err
		}
		switch v := v.(type) {
		case pgtype.Numeric:
			return v.Value()
		case [16]byte:
			return pgtype.UUID{Bytes: v, Valid: true}.Value()
		case pgtype.Interval:
			return duckdb.Interval{Months: v.Months, Days: v.Days, Micros: v.Microseconds}, nil
		case pgtype.InfinityModifier:
			return nil, fmt.Errorf("infinite dates and timestamps are not supported")
		}
		return v, nil
	}
	if p.Format() == wire.TextFormat {
		return string(p.Value()), nil
	}
	return nil, fmt.Errorf("binary values of type OID %d are not supported; send it as text", oid)
}

// execute runs st with args under a context that a cancel request, the statement
// timeout and shutdown can stop, and that copse callbacks see through the host.
func (s *session) execute(parent context.Context, st *statement, w wire.DataWriter, args []any) error {
	ctx, stop := context.WithCancelCause(parent)
	defer stop(nil)
	if t := s.srv.cfg.StatementTimeout; t > 0 {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeoutCause(ctx, t, errStatementTimeout)
		defer cancel()
	}
	s.srv.mu.Lock()
	if s.srv.closing {
		s.srv.mu.Unlock()
		return psqlerr.WithCode(errShutdown, stateAdminShutdown)
	}
	s.srv.running.Add(1)
	s.srv.mu.Unlock()
	defer s.srv.running.Done()

	s.mu.Lock()
	s.stop = stop
	s.mu.Unlock()
	defer func() {
		s.mu.Lock()
		s.stop = nil
		s.mu.Unlock()
	}()
	release, err := s.srv.host.Attach(ctx, s.conn)
	if err != nil {
		return withState(ctx, err)
	}
	defer release()
	if s.guard != nil {
		watchDone := make(chan struct{})
		defer close(watchDone)
		go s.watchPeer(ctx, stop, watchDone)
	}
	err = st.exec(ctx, w, args)
	s.noteTx(st, err)
	return withState(ctx, err)
}

// peerCheckEvery is how often a running statement checks that its client is still
// there: often enough that an abandoned training stops soon, rarely enough to cost
// nothing measurable.
const peerCheckEvery = 200 * time.Millisecond

// watchPeer cancels the statement when its client goes away, so that a dropped
// notebook does not leave a training running for nobody.
func (s *session) watchPeer(ctx context.Context, stop context.CancelCauseFunc, done <-chan struct{}) {
	tick := time.NewTicker(peerCheckEvery)
	defer tick.Stop()
	for {
		select {
		case <-done:
			return
		case <-ctx.Done():
			return
		case <-tick.C:
			if peerClosed(s.guard.Conn) {
				stop(errClientGone)
				return
			}
		}
	}
}

func (st *statement) exec(ctx context.Context, w wire.DataWriter, args []any) error {
	conn := st.sess.conn
	switch st.kind {
	case kindChanged:
		res, err := conn.ExecContext(ctx, st.sql, args...)
		if err != nil {
			return err
		}
		n, _ := res.RowsAffected()
		return w.Complete(fmt.Sprintf("%s%d", st.tag, n))
	case kindCommand:
		if _, err := conn.ExecContext(ctx, st.sql, args...); err != nil {
			return err
		}
		return w.Complete(st.tag)
	}
	rows, err := conn.QueryContext(ctx, st.sql, args...)
	if err != nil {
		return err
	}
	defer rows.Close()
	names, err := rows.Columns()
	if err != nil {
		return err
	}
	if len(names) != len(st.cols) {
		return psqlerr.WithCode(fmt.Errorf("the statement's result now has %d columns, not the %d it had when prepared; prepare it again", len(names), len(st.cols)), stateFeature)
	}
	vals := make([]any, len(names))
	ptrs := make([]any, len(names))
	for i := range vals {
		ptrs[i] = &vals[i]
	}
	row := make([]any, len(names))
	n := 0
	for rows.Next() {
		if err := rows.Scan(ptrs...); err != nil {
			return err
		}
		for i, v := range vals {
			if row[i], err = st.cols[i].convert(v); err != nil {
				return fmt.Errorf("column %q: %w", st.cols[i].name, err)
			}
		}
		if err := w.Row(row); err != nil {
			return err
		}
		n++
	}
	if err := rows.Err(); err != nil {
		return err
	}
	return w.Complete(fmt.Sprintf("%s%d", st.tag, n))
}

// noteTx follows BEGIN, COMMIT and ROLLBACK for the transaction status the client
// sees after each statement.
func (s *session) noteTx(st *statement, err error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	switch st.tag {
	case "BEGIN", "START":
		s.inTx, s.txError = err == nil, false
		return
	case "COMMIT", "END", "ROLLBACK", "ABORT":
		s.inTx, s.txError = false, false
		return
	}
	if err != nil && s.inTx {
		s.txError = true
	}
}
