package duck

import (
	"database/sql"
	"errors"
	"fmt"
	"time"
	"unsafe"

	"github.com/duckdb/duckdb-go/v2/mapping"
)

// TableFunc declares a table function registered with [RegisterTable].
type TableFunc struct {
	Name  string
	Args  []Type  // positional, all required; Varchar, BigInt, Double, Boolean or VarcharList
	Named []Param // optional named arguments (name := value); unknown names are DuckDB's error
	// Bind validates the arguments and declares the output columns. DuckDB
	// calls it for EXPLAIN, DESCRIBE and prepare too, and sometimes twice per
	// statement, so it must be cheap and free of side effects: put the work
	// in the first fill.
	Bind func(call TableCall) (*TableBinding, error)
}

// Param is a named argument.
type Param struct {
	Name string
	Type Type
}

// TableCall is what bind sees of one call site.
type TableCall struct {
	Args   []any          // positional values: string, int64, float64, bool, []string, or nil for NULL
	Named  map[string]any // only the named arguments the call gave, same value types
	ConnID uint64         // DuckDB id of the calling connection (duckdb.ConnId)
}

// TableBinding is the result of a successful bind.
type TableBinding struct {
	Columns []Column
	// Init starts one execution: a prepared statement executed three times
	// calls it three times, EXPLAIN never. It returns the fill function for
	// that execution. Fill calls are sequential.
	Init func() (FillFunc, error)
}

// Column is an output column of a table function.
type Column struct {
	Name string
	Type Type
}

// FillFunc writes up to out.Capacity() rows starting at row 0 and returns
// how many it wrote; 0 ends the result. An error aborts the query with its
// text.
type FillFunc func(out *Chunk) (int, error)

var errNoBind = errors.New("duck: table function has no Bind")

// RegisterTable registers f database-wide through conn's raw connection.
func RegisterTable(conn *sql.Conn, f TableFunc) error {
	if f.Name == "" || f.Bind == nil {
		return fmt.Errorf("duck: register table function %q: %w", f.Name, errNoBind)
	}
	for _, t := range f.Args {
		if !argType(t) {
			return fmt.Errorf("duck: register table function %s: argument type %v not supported", f.Name, t)
		}
	}
	for _, p := range f.Named {
		if !argType(p.Type) || p.Name == "" {
			return fmt.Errorf("duck: register table function %s: named argument %q of type %v not supported", f.Name, p.Name, p.Type)
		}
	}
	return WithConn(conn, func(raw mapping.Connection) error {
		tf := mapping.CreateTableFunction()
		defer mapping.DestroyTableFunction(&tf)
		mapping.TableFunctionSetName(tf, f.Name)
		for _, t := range f.Args {
			lt := t.logical()
			mapping.TableFunctionAddParameter(tf, lt)
			mapping.DestroyLogicalType(&lt)
		}
		for _, p := range f.Named {
			lt := p.Type.logical()
			mapping.TableFunctionAddNamedParameter(tf, p.Name, lt)
			mapping.DestroyLogicalType(&lt)
		}
		spec := f // a copy DuckDB keeps until the database closes
		mapping.TableFunctionSetExtraInfo(tf, newSlot(&spec), cbDeleteSlot)
		mapping.TableFunctionSetBind(tf, cbTableBind)
		mapping.TableFunctionSetInit(tf, cbTableInit)
		mapping.TableFunctionSetFunction(tf, cbTableFill)
		if mapping.RegisterTableFunction(raw, tf) == mapping.StateError {
			return fmt.Errorf("duck: register table function %s: DuckDB refused it", f.Name)
		}
		return nil
	})
}

func argType(t Type) bool {
	switch t {
	case Varchar, BigInt, Double, Boolean, VarcharList:
		return true
	}
	return false
}

// tableBound is the bind data of one call site.
type tableBound struct {
	name    string
	columns []Column
	init    func() (FillFunc, error)
}

// tableScan is the init data of one execution.
type tableScan struct {
	fill  FillFunc
	done  bool
	chunk Chunk
}

func tableBind(info mapping.BindInfo) (err error) {
	spec := slotValue(mapping.BindGetExtraInfo(info)).(*TableFunc)
	call := TableCall{Args: make([]any, len(spec.Args)), Named: map[string]any{}}
	for i, t := range spec.Args {
		v := mapping.BindGetParameter(info, mapping.IdxT(i))
		call.Args[i], err = valueToGo(v, t)
		mapping.DestroyValue(&v)
		if err != nil {
			return fmt.Errorf("%s: argument %d: %w", spec.Name, i+1, err)
		}
	}
	for _, p := range spec.Named {
		v := mapping.BindGetNamedParameter(info, p.Name)
		if v.Ptr == nil {
			continue // omitted
		}
		call.Named[p.Name], err = valueToGo(v, p.Type)
		mapping.DestroyValue(&v)
		if err != nil {
			return fmt.Errorf("%s: %s: %w", spec.Name, p.Name, err)
		}
	}
	var cc mapping.ClientContext
	mapping.TableFunctionGetClientContext(info, &cc)
	call.ConnID = uint64(mapping.ClientContextGetConnectionId(cc))
	mapping.DestroyClientContext(&cc)

	b, err := spec.Bind(call)
	if err != nil {
		return err
	}
	if b == nil || len(b.Columns) == 0 || b.Init == nil {
		return fmt.Errorf("%s: bind returned no columns or no Init", spec.Name)
	}
	for _, c := range b.Columns {
		if c.Type < Varchar || c.Type > VarcharDoubleMap {
			return fmt.Errorf("%s: column %q: type %v not supported", spec.Name, c.Name, c.Type)
		}
		lt := c.Type.logical()
		mapping.BindAddResultColumn(info, c.Name, lt)
		mapping.DestroyLogicalType(&lt)
	}
	bound := &tableBound{name: spec.Name, columns: b.Columns, init: b.Init}
	mapping.BindSetBindData(info, newSlot(bound), cbDeleteSlot)
	return nil
}

func tableInit(info mapping.InitInfo) error {
	bound := slotValue(mapping.InitGetBindData(info)).(*tableBound)
	fill, err := bound.init()
	if err != nil {
		return err
	}
	if fill == nil {
		return fmt.Errorf("%s: Init returned no fill function", bound.name)
	}
	mapping.InitSetMaxThreads(info, 1)
	scan := &tableScan{fill: fill, chunk: Chunk{columns: bound.columns}}
	mapping.InitSetInitData(info, newSlot(scan), cbDeleteSlot)
	return nil
}

func tableFill(info mapping.FunctionInfo, out mapping.DataChunk) error {
	scan := slotValue(mapping.FunctionGetInitData(info)).(*tableScan)
	if scan.done {
		mapping.DataChunkSetSize(out, 0)
		return nil
	}
	c := &scan.chunk
	c.reset(out)
	n, err := scan.fill(c)
	if err != nil {
		scan.done = true
		return err
	}
	if n < 0 || n > c.Capacity() {
		return fmt.Errorf("fill returned %d rows, capacity %d", n, c.Capacity())
	}
	if n == 0 {
		scan.done = true
	}
	mapping.DataChunkSetSize(out, mapping.IdxT(n))
	return nil
}

// Chunk is the output of one fill call. Setters panic on a column whose type
// does not match (a programming error; the panic becomes an SQL error).
// Values not set in rows [0, n) are undefined: set NULLs explicitly.
type Chunk struct {
	columns []Column
	chunk   mapping.DataChunk
	vecs    []mapping.Vector
	data    []unsafe.Pointer
}

func (c *Chunk) reset(out mapping.DataChunk) {
	c.chunk = out
	if c.vecs == nil {
		c.vecs = make([]mapping.Vector, len(c.columns))
		c.data = make([]unsafe.Pointer, len(c.columns))
	}
	for i := range c.columns {
		c.vecs[i] = mapping.DataChunkGetVector(out, mapping.IdxT(i))
		c.data[i] = mapping.VectorGetData(c.vecs[i])
	}
}

// Capacity is the maximum number of rows one fill may write (DuckDB's
// vector size, 2048).
func (c *Chunk) Capacity() int { return int(mapping.VectorSize()) }

func (c *Chunk) check(col, row int, want Type) unsafe.Pointer {
	if c.columns[col].Type != want {
		panic(fmt.Sprintf("duck: column %q is %v, not %v", c.columns[col].Name, c.columns[col].Type, want))
	}
	if uint(row) >= uint(c.Capacity()) {
		panic(fmt.Sprintf("duck: row %d out of range", row))
	}
	return c.data[col]
}

// SetNull makes (col, row) NULL.
func (c *Chunk) SetNull(col, row int) {
	mapping.VectorEnsureValidityWritable(c.vecs[col])
	mapping.ValiditySetRowInvalid(mapping.VectorGetValidity(c.vecs[col]), mapping.IdxT(row))
}

// SetString sets a VARCHAR cell; DuckDB copies s.
func (c *Chunk) SetString(col, row int, s string) {
	c.check(col, row, Varchar)
	mapping.VectorAssignStringElement(c.vecs[col], mapping.IdxT(row), s)
}

// SetInt64 sets a BIGINT cell.
func (c *Chunk) SetInt64(col, row int, v int64) {
	*(*int64)(unsafe.Add(c.check(col, row, BigInt), row*8)) = v
}

// SetFloat64 sets a DOUBLE cell.
func (c *Chunk) SetFloat64(col, row int, v float64) {
	*(*float64)(unsafe.Add(c.check(col, row, Double), row*8)) = v
}

// SetBool sets a BOOLEAN cell.
func (c *Chunk) SetBool(col, row int, v bool) {
	var b uint8
	if v {
		b = 1
	}
	*(*uint8)(unsafe.Add(c.check(col, row, Boolean), row)) = b
}

// SetTime sets a TIMESTAMP cell (microseconds, time zone dropped as UTC).
func (c *Chunk) SetTime(col, row int, t time.Time) {
	*(*int64)(unsafe.Add(c.check(col, row, Timestamp), row*8)) = t.UnixMicro()
}

// SetStrings sets a LIST(VARCHAR) cell.
func (c *Chunk) SetStrings(col, row int, vals []string) {
	c.check(col, row, VarcharList)
	off := c.growList(col, row, len(vals))
	child := mapping.ListVectorGetChild(c.vecs[col])
	for i, s := range vals {
		mapping.VectorAssignStringElement(child, mapping.IdxT(off+i), s)
	}
}

// SetFloat64s sets a LIST(DOUBLE) cell.
func (c *Chunk) SetFloat64s(col, row int, vals []float64) {
	c.check(col, row, DoubleList)
	off := c.growList(col, row, len(vals))
	child := mapping.ListVectorGetChild(c.vecs[col])
	copy(unsafe.Slice((*float64)(mapping.VectorGetData(child)), off+len(vals))[off:], vals)
}

// SetMap sets a MAP(VARCHAR, DOUBLE) cell from parallel keys and values;
// keys must be distinct (DuckDB's map rule).
func (c *Chunk) SetMap(col, row int, keys []string, vals []float64) {
	c.check(col, row, VarcharDoubleMap)
	if len(keys) != len(vals) {
		panic(fmt.Sprintf("duck: SetMap with %d keys and %d values", len(keys), len(vals)))
	}
	off := c.growList(col, row, len(keys))
	entries := mapping.ListVectorGetChild(c.vecs[col])
	kv, vv := mapping.StructVectorGetChild(entries, 0), mapping.StructVectorGetChild(entries, 1)
	for i, k := range keys {
		mapping.VectorAssignStringElement(kv, mapping.IdxT(off+i), k)
	}
	copy(unsafe.Slice((*float64)(mapping.VectorGetData(vv)), off+len(vals))[off:], vals)
}

// listEntry mirrors duckdb_list_entry.
type listEntry struct{ offset, length uint64 }

// growList appends n child slots to a LIST or MAP column, points row at them
// and returns the first child offset.
func (c *Chunk) growList(col, row, n int) int {
	v := c.vecs[col]
	off := int(mapping.ListVectorGetSize(v))
	if mapping.ListVectorReserve(v, mapping.IdxT(off+n)) == mapping.StateError ||
		mapping.ListVectorSetSize(v, mapping.IdxT(off+n)) == mapping.StateError {
		panic("duck: cannot grow list vector")
	}
	*(*listEntry)(unsafe.Add(c.data[col], row*16)) = listEntry{uint64(off), uint64(n)}
	return off
}
