package duck

import (
	"database/sql"
	"errors"
	"fmt"
	"reflect"
	"sync"
	"unsafe"

	"github.com/duckdb/duckdb-go/v2"
	"github.com/duckdb/duckdb-go/v2/mapping"
)

// ErrLayout means the driver's private connection layout is not the one this
// package was written against (a duckdb-go upgrade); nothing was read.
var ErrLayout = errors.New("duck: unexpected duckdb-go connection layout")

// rawConnOffset is the offset of the private field conn (a
// mapping.Connection) inside duckdb.Conn, checked once by reflection.
var rawConnOffset = sync.OnceValues(func() (uintptr, error) {
	ct := reflect.TypeFor[mapping.Connection]()
	if ct.Kind() != reflect.Struct || ct.NumField() != 1 ||
		ct.Field(0).Name != "Ptr" || ct.Field(0).Type != reflect.TypeFor[unsafe.Pointer]() {
		return 0, fmt.Errorf("%w: mapping.Connection is not struct{Ptr unsafe.Pointer}", ErrLayout)
	}
	f, ok := reflect.TypeFor[duckdb.Conn]().FieldByName("conn")
	if !ok {
		return 0, fmt.Errorf("%w: duckdb.Conn has no field conn", ErrLayout)
	}
	if f.Type != ct || len(f.Index) != 1 {
		return 0, fmt.Errorf("%w: duckdb.Conn.conn has type %v", ErrLayout, f.Type)
	}
	return f.Offset, nil
})

// CheckLayout returns an error wrapping [ErrLayout] when the driver's private
// layout differs from what [WithConn] reads. Call it at start-up so an
// upgrade fails loudly instead of corrupting memory.
func CheckLayout() error {
	_, err := rawConnOffset()
	return err
}

// WithConn calls f with the raw DuckDB connection behind c, which must come
// from a *sql.DB opened with the duckdb driver (in-memory or file). The
// handle is valid only during f, and c is locked meanwhile: f must not use c
// through database/sql. Besides the reflect check, the handle's DuckDB
// connection id is compared with the driver's own, so a wrong read is
// reported as [ErrLayout] before f runs.
func WithConn(c *sql.Conn, f func(mapping.Connection) error) error {
	off, err := rawConnOffset()
	if err != nil {
		return err
	}
	want, err := duckdb.ConnId(c)
	if err != nil {
		return fmt.Errorf("duck: connection id: %w", err)
	}
	return c.Raw(func(dc any) error {
		d, ok := dc.(*duckdb.Conn)
		if !ok {
			return fmt.Errorf("duck: driver connection is %T, not *duckdb.Conn", dc)
		}
		raw := *(*mapping.Connection)(unsafe.Add(unsafe.Pointer(d), off))
		if raw.Ptr == nil {
			return errors.New("duck: connection is closed")
		}
		var cc mapping.ClientContext
		mapping.ConnectionGetClientContext(raw, &cc)
		got := uint64(mapping.ClientContextGetConnectionId(cc))
		mapping.DestroyClientContext(&cc)
		if got != want {
			return fmt.Errorf("%w: raw connection id %d, driver says %d", ErrLayout, got, want)
		}
		return f(raw)
	})
}
