package duck

import (
	"database/sql"
	"fmt"
	"math"
	"unsafe"

	"github.com/duckdb/duckdb-go/v2/mapping"
)

// ScalarFunc declares a scalar function registered with [RegisterScalar].
// It is registered as not volatile and with special NULL handling: NULL
// arguments and NULL STRUCT fields reach the executor (as invalid rows),
// and the executor decides the result's NULLs.
type ScalarFunc struct {
	Name   string
	Args   []Type // Varchar, BigInt, Double, Boolean or Any (e.g. a STRUCT row)
	Result Type   // Double or Varchar
	// Bind runs once per call site when the query is planned (also for
	// EXPLAIN and prepare). It sees every argument's type and, for constant
	// arguments, their value, and returns the executor for that call site or
	// an error, which becomes the query's error.
	Bind func(call ScalarCall) (ScalarExec, error)
}

// ScalarCall is what bind sees of one call site.
type ScalarCall struct {
	Args   []ScalarArg
	ConnID uint64 // DuckDB id of the calling connection
}

// ScalarArg describes one argument at bind time.
type ScalarArg struct {
	Type TypeInfo
	// Foldable is true for constant expressions. Value is then the folded
	// value for VARCHAR, integer, floating, DECIMAL and BOOLEAN constants
	// (string, int64, float64, bool, or nil for NULL); other constants and
	// non-constant arguments, such as a $1 parameter, leave it nil: read
	// them from the input in the executor.
	Foldable bool
	Value    any
}

// ScalarExec computes one chunk: it reads in and writes out.Len() results.
// DuckDB calls it concurrently from its worker threads, so it must treat
// state captured at bind as read-only and keep scratch space per call.
type ScalarExec func(in *ScalarInput, out *ScalarOutput) error

// RegisterScalar registers f database-wide through conn's raw connection.
func RegisterScalar(conn *sql.Conn, f ScalarFunc) error {
	if f.Name == "" || f.Bind == nil {
		return fmt.Errorf("duck: register scalar function %q: missing name or Bind", f.Name)
	}
	if f.Result != Double && f.Result != Varchar {
		return fmt.Errorf("duck: register scalar function %s: result type %v not supported", f.Name, f.Result)
	}
	for _, t := range f.Args {
		switch t {
		case Varchar, BigInt, Double, Boolean, Any:
		default:
			return fmt.Errorf("duck: register scalar function %s: argument type %v not supported", f.Name, t)
		}
	}
	return WithConn(conn, func(raw mapping.Connection) error {
		sf := mapping.CreateScalarFunction()
		defer mapping.DestroyScalarFunction(&sf)
		mapping.ScalarFunctionSetName(sf, f.Name)
		for _, t := range f.Args {
			lt := t.logical()
			mapping.ScalarFunctionAddParameter(sf, lt)
			mapping.DestroyLogicalType(&lt)
		}
		rt := f.Result.logical()
		mapping.ScalarFunctionSetReturnType(sf, rt)
		mapping.DestroyLogicalType(&rt)
		mapping.ScalarFunctionSetSpecialHandling(sf)
		spec := f
		mapping.ScalarFunctionSetExtraInfo(sf, newSlot(&spec), cbDeleteSlot)
		mapping.ScalarFunctionSetBind(sf, cbScalarBind)
		mapping.ScalarFunctionSetFunction(sf, cbScalarExec)
		if mapping.RegisterScalarFunction(raw, sf) == mapping.StateError {
			return fmt.Errorf("duck: register scalar function %s: DuckDB refused it", f.Name)
		}
		return nil
	})
}

// scalarBound is the read-only bind data of one call site.
type scalarBound struct {
	exec   ScalarExec
	args   []TypeInfo
	result Type
}

func scalarBind(info mapping.BindInfo) error {
	spec := slotValue(mapping.ScalarFunctionBindGetExtraInfo(info)).(*ScalarFunc)
	var cc mapping.ClientContext
	mapping.ScalarFunctionGetClientContext(info, &cc)
	defer mapping.DestroyClientContext(&cc)
	n := int(mapping.ScalarFunctionBindGetArgumentCount(info))
	call := ScalarCall{Args: make([]ScalarArg, n), ConnID: uint64(mapping.ClientContextGetConnectionId(cc))}
	for i := range n {
		expr := mapping.ScalarFunctionBindGetArgument(info, mapping.IdxT(i))
		lt := mapping.ExpressionReturnType(expr)
		a := ScalarArg{Type: typeInfoOf(lt), Foldable: mapping.ExpressionIsFoldable(expr)}
		mapping.DestroyLogicalType(&lt)
		if a.Foldable && foldable(a.Type.ID) {
			var v mapping.Value
			ed := mapping.ExpressionFold(cc, expr, &v)
			failed := mapping.ErrorDataHasError(ed)
			msg := ""
			if failed {
				msg = mapping.ErrorDataMessage(ed)
			} else {
				a.Value, _ = valueToGo(v, Any)
			}
			mapping.DestroyErrorData(&ed)
			mapping.DestroyValue(&v)
			if failed {
				mapping.DestroyExpression(&expr)
				return fmt.Errorf("%s: argument %d: %s", spec.Name, i+1, msg)
			}
		}
		mapping.DestroyExpression(&expr)
		if i < len(spec.Args) && spec.Args[i] != Any {
			// DuckDB casts the argument to the declared type before the executor
			// sees it; the expression's own type may differ, or not be known yet
			// (a parameter of a statement being prepared).
			a.Type = TypeInfo{ID: spec.Args[i].id()}
		}
		call.Args[i] = a
	}
	exec, err := spec.Bind(call)
	if err != nil {
		return err
	}
	if exec == nil {
		return fmt.Errorf("%s: bind returned no executor", spec.Name)
	}
	b := &scalarBound{exec: exec, args: make([]TypeInfo, n), result: spec.Result}
	for i, a := range call.Args {
		b.args[i] = a.Type
	}
	mapping.ScalarFunctionSetBindData(info, newSlot(b), cbDeleteSlot)
	mapping.ScalarFunctionSetBindDataCopy(info, cbCopySlot)
	return nil
}

func foldable(id mapping.Type) bool {
	switch id {
	case mapping.TypeVarchar, mapping.TypeBoolean, mapping.TypeTinyInt, mapping.TypeSmallInt,
		mapping.TypeInteger, mapping.TypeBigInt, mapping.TypeUTinyInt, mapping.TypeUSmallInt,
		mapping.TypeUInteger, mapping.TypeFloat, mapping.TypeDouble, mapping.TypeDecimal,
		mapping.TypeSQLNull:
		return true
	}
	return false
}

func scalarExec(info mapping.FunctionInfo, input mapping.DataChunk, output mapping.Vector) error {
	b := slotValue(mapping.ScalarFunctionGetBindData(info)).(*scalarBound)
	n := int(mapping.DataChunkGetSize(input))
	in := ScalarInput{chunk: input, n: n, args: b.args}
	out := ScalarOutput{vec: output, n: n, typ: b.result}
	return b.exec(&in, &out)
}

// ScalarInput is one input chunk. Vectors are flat (DuckDB flattens the
// chunk before calling us), so row i of every argument is at index i.
type ScalarInput struct {
	chunk mapping.DataChunk
	n     int
	args  []TypeInfo
}

// Len is the number of rows in the chunk (at most 2048).
func (in *ScalarInput) Len() int { return in.n }

// Arg returns argument i as a zero-copy vector.
func (in *ScalarInput) Arg(i int) Vec {
	return vecOf(mapping.DataChunkGetVector(in.chunk, mapping.IdxT(i)), &in.args[i], in.n)
}

// Field returns child f of STRUCT argument i as a zero-copy vector. A row
// whose whole struct is NULL may still look valid here: check
// in.Arg(i).Valid(row) when that can happen (for example an outer join).
func (in *ScalarInput) Field(i, f int) Vec {
	t := &in.args[i]
	if t.ID != mapping.TypeStruct || f >= len(t.Fields) {
		panic(fmt.Sprintf("duck: argument %d (%v) has no field %d", i, t, f))
	}
	sv := mapping.DataChunkGetVector(in.chunk, mapping.IdxT(i))
	return vecOf(mapping.StructVectorGetChild(sv, mapping.IdxT(f)), &t.Fields[f].Type, in.n)
}

// ScalarOutput is the result vector of one chunk. Rows start valid.
type ScalarOutput struct {
	vec mapping.Vector
	n   int
	typ Type
}

// Len is the number of results to write.
func (out *ScalarOutput) Len() int { return out.n }

// Float64s returns the DOUBLE result buffer itself; write results into it.
// It panics for a VARCHAR result.
func (out *ScalarOutput) Float64s() []float64 {
	if out.typ != Double {
		panic("duck: Float64s on a " + out.typ.String() + " result")
	}
	return unsafe.Slice((*float64)(mapping.VectorGetData(out.vec)), out.n)
}

// SetString sets result i of a VARCHAR function; DuckDB copies s.
func (out *ScalarOutput) SetString(i int, s string) {
	if out.typ != Varchar {
		panic("duck: SetString on a " + out.typ.String() + " result")
	}
	mapping.VectorAssignStringElement(out.vec, mapping.IdxT(i), s)
}

// SetNull makes result i NULL.
func (out *ScalarOutput) SetNull(i int) {
	mapping.VectorEnsureValidityWritable(out.vec)
	mapping.ValiditySetRowInvalid(mapping.VectorGetValidity(out.vec), mapping.IdxT(i))
}

// NaNToNull turns NaN results of a DOUBLE function into NULLs, so "no
// prediction" can be written as NaN in the hot loop.
func (out *ScalarOutput) NaNToNull() {
	for i, v := range out.Float64s() {
		if math.IsNaN(v) {
			out.SetNull(i)
		}
	}
}
