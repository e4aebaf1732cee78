package udf

import (
	"context"
	"database/sql"
	"fmt"
	"sync"

	"github.com/duckdb/duckdb-go/v2"

	"github.com/copse-dev/copse/udf/internal/duck"
)

// minPoolConns keeps room for nested work: a statement's own connection, one that reads
// its training source or writes the catalog, and spares for concurrent sessions.
const minPoolConns = 8

// Host owns one DuckDB database with the copse functions registered on it.
type Host struct {
	db       *sql.DB
	cache    modelCache
	resolved resolveCache
	jobs     jobTable

	mu       sync.Mutex
	attached map[uint64]context.Context // DuckDB connection id → statement context

	// saveMu serialises catalog writes: two trainings of one name would otherwise both
	// pick the same next version, and one would fail at commit after all its work.
	saveMu sync.Mutex
}

// Open opens (or creates) the DuckDB database at path ("" for an in-memory database),
// creates the model catalog if it is missing and registers the functions.
func Open(ctx context.Context, path string) (*Host, error) {
	db, err := sql.Open("duckdb", path)
	if err != nil {
		return nil, fmt.Errorf("udf: open %q: %w", path, err)
	}
	h, err := New(ctx, db)
	if err != nil {
		db.Close()
		return nil, err
	}
	return h, nil
}

// New registers the functions on an already open DuckDB database. The host takes db over:
// Close closes it.
func New(ctx context.Context, db *sql.DB) (*Host, error) {
	if err := duck.CheckLayout(); err != nil {
		return nil, fmt.Errorf("udf: %w", err)
	}
	db.SetMaxOpenConns(0)
	db.SetMaxIdleConns(minPoolConns)
	h := &Host{db: db, attached: map[uint64]context.Context{}}
	if err := h.createCatalog(ctx); err != nil {
		return nil, err
	}
	conn, err := db.Conn(ctx)
	if err != nil {
		return nil, fmt.Errorf("udf: connect: %w", err)
	}
	defer conn.Close()
	for _, register := range []func(*sql.Conn) error{
		h.registerTraining,
		h.registerScoring,
		h.registerRelations,
		h.registerBlends,
		h.registerEvaluation,
		h.registerExplain,
		h.registerValidation,
		h.registerExport,
		h.registerPMML,
	} {
		if err := register(conn); err != nil {
			return nil, fmt.Errorf("udf: register: %w", err)
		}
	}
	return h, nil
}

// DB is the host's database handle; any of its connections sees the functions.
func (h *Host) DB() *sql.DB { return h.db }

// Close closes the database.
func (h *Host) Close() error { return h.db.Close() }

// Attach hands ctx to the statements run on conn until the returned release is called:
// training on that connection stops when ctx is done.
func (h *Host) Attach(ctx context.Context, conn *sql.Conn) (release func(), err error) {
	id, err := duckdb.ConnId(conn)
	if err != nil {
		return nil, fmt.Errorf("udf: attach: %w", err)
	}
	h.mu.Lock()
	h.attached[id] = ctx
	h.mu.Unlock()
	return func() {
		h.mu.Lock()
		delete(h.attached, id)
		h.mu.Unlock()
	}, nil
}

// contextOf returns the context attached to a DuckDB connection, or Background.
func (h *Host) contextOf(connID uint64) context.Context {
	h.mu.Lock()
	defer h.mu.Unlock()
	if ctx, ok := h.attached[connID]; ok {
		return ctx
	}
	return context.Background()
}
