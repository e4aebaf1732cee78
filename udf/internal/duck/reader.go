package duck

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"slices"
	"strings"
	"unsafe"

	bindings "github.com/duckdb/duckdb-go-bindings"
	"github.com/duckdb/duckdb-go/v2/mapping"
)

// ResultColumn is one column of a query result read by [ReadColumns].
// Exactly one of Values and Codes is set.
type ResultColumn struct {
	Name string
	Type TypeInfo
	// Values holds numeric columns converted as [Vec.Float64s] does
	// (BOOLEAN 0/1, DATE days, TIMESTAMP seconds, DECIMAL exact scale), NaN
	// for NULL.
	Values []float64
	// Codes holds VARCHAR and ENUM columns as indexes into Levels, -1 for
	// NULL. VARCHAR levels are in first-seen order; ENUM levels are the
	// enum's own dictionary, in its order.
	Codes  []int32
	Levels []string
}

// ErrColumnType is wrapped by the error for a result column whose type
// cannot be read (LIST, STRUCT, BLOB, …).
var ErrColumnType = errors.New("unsupported column type")

// ReadOptions tunes [ReadColumns].
type ReadOptions struct {
	// Skip, if set, leaves out the columns it returns true for, so an
	// excluded unsupported column is not an error.
	Skip func(name string) bool
}

// ReadColumns runs one query on a connection of its own from db's pool
// (never the caller's: inside a callback that would deadlock) and returns
// its columns in Go memory. The result is streamed chunk by chunk, so DuckDB
// never materialises it; ctx cancels the query. The connection sees
// committed data only. Column types are checked before the query runs.
func ReadColumns(ctx context.Context, db *sql.DB, query string, opt ReadOptions) ([]ResultColumn, error) {
	conn, err := db.Conn(ctx)
	if err != nil {
		return nil, fmt.Errorf("duck: read: get connection: %w", err)
	}
	defer conn.Close()
	var cols []ResultColumn
	err = WithConn(conn, func(raw mapping.Connection) error {
		var err error
		cols, err = readRaw(ctx, raw, query, opt)
		return err
	})
	if err != nil {
		return nil, err
	}
	return cols, nil
}

// colReader turns one result vector per chunk into a ResultColumn.
type colReader struct {
	src   int // column index in the result
	out   *ResultColumn
	dict  map[string]int32 // VARCHAR
	codes mapping.Type     // ENUM storage type; TypeInvalid for VARCHAR
}

func readRaw(ctx context.Context, raw mapping.Connection, query string, opt ReadOptions) ([]ResultColumn, error) {
	var stmt mapping.PreparedStatement
	defer mapping.DestroyPrepare(&stmt)
	if mapping.Prepare(raw, query, &stmt) == mapping.StateError {
		return nil, fmt.Errorf("duck: read: %s", mapping.PrepareError(stmt))
	}
	n := int(mapping.PreparedStatementColumnCount(stmt))
	cols := make([]ResultColumn, 0, n)
	readers := make([]colReader, 0, n)
	for i := range n {
		name := mapping.PreparedStatementColumnName(stmt, mapping.IdxT(i))
		if opt.Skip != nil && opt.Skip(name) {
			continue
		}
		lt := mapping.PreparedStatementColumnLogicalType(stmt, mapping.IdxT(i))
		t := typeInfoOf(lt)
		r := colReader{src: i}
		var levels []string
		switch {
		case t.ID == mapping.TypeVarchar:
			r.dict = map[string]int32{}
			levels = []string{}
		case t.ID == mapping.TypeEnum:
			r.codes = mapping.EnumInternalType(lt)
			levels = make([]string, mapping.EnumDictionarySize(lt))
			for j := range levels {
				levels[j] = mapping.EnumDictionaryValue(lt, mapping.IdxT(j))
			}
		case !t.Numeric():
			mapping.DestroyLogicalType(&lt)
			return nil, fmt.Errorf("duck: read: column %q: %w %v", name, ErrColumnType, t)
		}
		mapping.DestroyLogicalType(&lt)
		cols = append(cols, ResultColumn{Name: name, Type: t, Levels: levels})
		readers = append(readers, r)
	}
	for i := range readers {
		readers[i].out = &cols[i]
	}

	stop := make(chan struct{})
	done := make(chan struct{})
	go func() { // DuckDB checks the interrupt flag between tasks and chunks
		defer close(done)
		select {
		case <-ctx.Done():
			mapping.Interrupt(raw)
		case <-stop:
		}
	}()
	defer func() { close(stop); <-done }()

	var pending mapping.PendingResult
	defer mapping.DestroyPending(&pending)
	// mapping does not re-export the streaming variant; its types are
	// aliases of the bindings' ones, so calling the bindings is equivalent.
	if bindings.PendingPreparedStreaming(stmt, &pending) == mapping.StateError {
		return nil, fmt.Errorf("duck: read: %s", mapping.PendingError(pending))
	}
	var res mapping.Result
	defer mapping.DestroyResult(&res)
	if mapping.ExecutePending(pending, &res) == mapping.StateError {
		return nil, readErr(ctx, mapping.ResultError(&res))
	}
	for {
		chunk := mapping.FetchChunk(res)
		if chunk.Ptr == nil {
			if msg := mapping.ResultError(&res); msg != "" {
				return nil, readErr(ctx, msg)
			}
			break
		}
		rows := int(mapping.DataChunkGetSize(chunk))
		var err error
		for i := range readers {
			if err = readers[i].read(chunk, rows); err != nil {
				break
			}
		}
		mapping.DestroyDataChunk(&chunk)
		if err != nil {
			return nil, err
		}
		if rows == 0 {
			break
		}
	}
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("duck: read: %w", err)
	}
	return cols, nil
}

func readErr(ctx context.Context, msg string) error {
	if err := ctx.Err(); err != nil {
		return fmt.Errorf("duck: read: %w (%s)", err, msg)
	}
	return fmt.Errorf("duck: read: %s", msg)
}

func (r *colReader) read(chunk mapping.DataChunk, rows int) error {
	if rows == 0 {
		return nil
	}
	v := vecOf(mapping.DataChunkGetVector(chunk, mapping.IdxT(r.src)), &r.out.Type, rows)
	c := r.out
	switch {
	case r.dict != nil:
		old := len(c.Codes)
		c.Codes = slices.Grow(c.Codes, rows)[:old+rows]
		dst := c.Codes[old:]
		for i := range rows {
			if !v.Valid(i) {
				dst[i] = -1
				continue
			}
			s := duckString(unsafe.Add(v.data, i*16))
			code, ok := r.dict[s] // no allocation: s is only borrowed
			if !ok {
				code = int32(len(c.Levels))
				s = strings.Clone(s)
				r.dict[s] = code
				c.Levels = append(c.Levels, s)
			}
			dst[i] = code
		}
	case c.Type.ID == mapping.TypeEnum:
		old := len(c.Codes)
		c.Codes = slices.Grow(c.Codes, rows)[:old+rows]
		dst := c.Codes[old:]
		switch r.codes {
		case mapping.TypeUTinyInt:
			widen(dst, unsafe.Slice((*uint8)(v.data), rows))
		case mapping.TypeUSmallInt:
			widen(dst, unsafe.Slice((*uint16)(v.data), rows))
		case mapping.TypeUInteger:
			widen(dst, unsafe.Slice((*uint32)(v.data), rows))
		default:
			return fmt.Errorf("duck: read: column %q: enum storage %d", c.Name, r.codes)
		}
		for i := range rows {
			if !v.Valid(i) {
				dst[i] = -1
			}
		}
	default:
		old := len(c.Values)
		c.Values = slices.Grow(c.Values, rows)[:old+rows]
		if err := v.Float64s(c.Values[old:]); err != nil {
			return fmt.Errorf("duck: read: column %q: %w", c.Name, err)
		}
	}
	return nil
}

func widen[T uint8 | uint16 | uint32](dst []int32, src []T) {
	for i, x := range src {
		dst[i] = int32(x)
	}
}
