package duck

import (
	"fmt"
	"math"
	"strings"
	"unsafe"

	"github.com/duckdb/duckdb-go/v2/mapping"
)

// Type is a SQL type that functions can declare for arguments and results.
type Type int

// Declarable types. The zero Type is invalid so a forgotten field is caught
// at registration.
const (
	Varchar          Type = iota + 1 // VARCHAR ↔ string
	BigInt                           // BIGINT ↔ int64
	Double                           // DOUBLE ↔ float64
	Boolean                          // BOOLEAN ↔ bool
	Timestamp                        // TIMESTAMP ↔ time.Time (result columns only)
	VarcharList                      // LIST(VARCHAR) ↔ []string
	DoubleList                       // LIST(DOUBLE) ↔ []float64 (result columns only)
	VarcharDoubleMap                 // MAP(VARCHAR, DOUBLE) (result columns only)
	Any                              // ANY (scalar arguments only); bind sees the real type
)

var typeNames = [...]string{"INVALID", "VARCHAR", "BIGINT", "DOUBLE", "BOOLEAN", "TIMESTAMP",
	"LIST(VARCHAR)", "LIST(DOUBLE)", "MAP(VARCHAR, DOUBLE)", "ANY"}

func (t Type) String() string {
	if t < 0 || int(t) >= len(typeNames) {
		return fmt.Sprintf("Type(%d)", int(t))
	}
	return typeNames[t]
}

// logical creates t's DuckDB type; the caller destroys it.
func (t Type) logical() mapping.LogicalType {
	switch t {
	case Varchar:
		return mapping.CreateLogicalType(mapping.TypeVarchar)
	case BigInt:
		return mapping.CreateLogicalType(mapping.TypeBigInt)
	case Double:
		return mapping.CreateLogicalType(mapping.TypeDouble)
	case Boolean:
		return mapping.CreateLogicalType(mapping.TypeBoolean)
	case Timestamp:
		return mapping.CreateLogicalType(mapping.TypeTimestamp)
	case VarcharList, DoubleList:
		child := Varchar
		if t == DoubleList {
			child = Double
		}
		c := child.logical()
		defer mapping.DestroyLogicalType(&c)
		return mapping.CreateListType(c)
	case VarcharDoubleMap:
		k, v := Varchar.logical(), Double.logical()
		defer mapping.DestroyLogicalType(&k)
		defer mapping.DestroyLogicalType(&v)
		return mapping.CreateMapType(k, v)
	case Any:
		return mapping.CreateLogicalType(mapping.TypeAny)
	}
	panic(fmt.Sprintf("duck: no logical type for %v", t))
}

// id is the DuckDB type id of a scalar Type (Any and nested types give TypeInvalid).
func (t Type) id() mapping.Type {
	switch t {
	case Varchar:
		return mapping.TypeVarchar
	case BigInt:
		return mapping.TypeBigInt
	case Double:
		return mapping.TypeDouble
	case Boolean:
		return mapping.TypeBoolean
	case Timestamp:
		return mapping.TypeTimestamp
	}
	return mapping.TypeInvalid
}

// TypeInfo describes a DuckDB type seen at bind time.
type TypeInfo struct {
	ID           mapping.Type
	Width, Scale uint8        // DECIMAL only
	Fields       []Field      // STRUCT only, in declaration order
	Elem         *TypeInfo    // LIST only
	Levels       []string     // ENUM only: the dictionary, indexed by code
	internal     mapping.Type // DECIMAL and ENUM storage type
}

// Field is one child of a STRUCT.
type Field struct {
	Name string
	Type TypeInfo
}

// typeInfoOf describes lt recursively; it does not take ownership of lt.
func typeInfoOf(lt mapping.LogicalType) TypeInfo {
	t := TypeInfo{ID: mapping.GetTypeId(lt)}
	switch t.ID {
	case mapping.TypeDecimal:
		t.Width, t.Scale = mapping.DecimalWidth(lt), mapping.DecimalScale(lt)
		t.internal = mapping.DecimalInternalType(lt)
	case mapping.TypeEnum:
		t.internal = mapping.EnumInternalType(lt)
		t.Levels = make([]string, mapping.EnumDictionarySize(lt))
		for i := range t.Levels {
			t.Levels[i] = mapping.EnumDictionaryValue(lt, mapping.IdxT(i))
		}
	case mapping.TypeStruct:
		n := int(mapping.StructTypeChildCount(lt))
		t.Fields = make([]Field, n)
		for i := range n {
			ct := mapping.StructTypeChildType(lt, mapping.IdxT(i))
			t.Fields[i] = Field{Name: mapping.StructTypeChildName(lt, mapping.IdxT(i)), Type: typeInfoOf(ct)}
			mapping.DestroyLogicalType(&ct)
		}
	case mapping.TypeList:
		ct := mapping.ListTypeChildType(lt)
		e := typeInfoOf(ct)
		mapping.DestroyLogicalType(&ct)
		t.Elem = &e
	}
	return t
}

var idNames = map[mapping.Type]string{
	mapping.TypeBoolean: "BOOLEAN", mapping.TypeTinyInt: "TINYINT", mapping.TypeSmallInt: "SMALLINT",
	mapping.TypeInteger: "INTEGER", mapping.TypeBigInt: "BIGINT", mapping.TypeUTinyInt: "UTINYINT",
	mapping.TypeUSmallInt: "USMALLINT", mapping.TypeUInteger: "UINTEGER", mapping.TypeUBigInt: "UBIGINT",
	mapping.TypeFloat: "FLOAT", mapping.TypeDouble: "DOUBLE", mapping.TypeTimestamp: "TIMESTAMP",
	mapping.TypeDate: "DATE", mapping.TypeTime: "TIME", mapping.TypeInterval: "INTERVAL",
	mapping.TypeHugeInt: "HUGEINT", mapping.TypeUHugeInt: "UHUGEINT", mapping.TypeVarchar: "VARCHAR",
	mapping.TypeBlob: "BLOB", mapping.TypeTimestampS: "TIMESTAMP_S", mapping.TypeTimestampMS: "TIMESTAMP_MS",
	mapping.TypeTimestampNS: "TIMESTAMP_NS", mapping.TypeEnum: "ENUM", mapping.TypeMap: "MAP",
	mapping.TypeArray: "ARRAY", mapping.TypeUUID: "UUID", mapping.TypeUnion: "UNION", mapping.TypeBit: "BIT",
	mapping.TypeTimeTZ: "TIME WITH TIME ZONE", mapping.TypeTimestampTZ: "TIMESTAMP WITH TIME ZONE",
	mapping.TypeAny: "ANY", mapping.TypeBigNum: "BIGNUM", mapping.TypeSQLNull: "NULL",
	mapping.TypeStringLiteral: "STRING_LITERAL", mapping.TypeIntegerLiteral: "INTEGER_LITERAL",
}

// String gives a SQL-like spelling, for error messages.
func (t TypeInfo) String() string {
	switch t.ID {
	case mapping.TypeDecimal:
		return fmt.Sprintf("DECIMAL(%d,%d)", t.Width, t.Scale)
	case mapping.TypeStruct:
		parts := make([]string, len(t.Fields))
		for i, f := range t.Fields {
			parts[i] = f.Name + " " + f.Type.String()
		}
		return "STRUCT(" + strings.Join(parts, ", ") + ")"
	case mapping.TypeList:
		if t.Elem != nil {
			return t.Elem.String() + "[]"
		}
	}
	if s, ok := idNames[t.ID]; ok {
		return s
	}
	return fmt.Sprintf("TYPE(%d)", int(t.ID))
}

// Numeric reports whether [Vec.Float64s] can convert values of this type.
func (t TypeInfo) Numeric() bool {
	switch t.ID {
	case mapping.TypeBoolean, mapping.TypeTinyInt, mapping.TypeSmallInt, mapping.TypeInteger,
		mapping.TypeBigInt, mapping.TypeUTinyInt, mapping.TypeUSmallInt, mapping.TypeUInteger,
		mapping.TypeUBigInt, mapping.TypeHugeInt, mapping.TypeFloat, mapping.TypeDouble,
		mapping.TypeDate, mapping.TypeTimestamp, mapping.TypeTimestampS, mapping.TypeTimestampMS,
		mapping.TypeTimestampNS, mapping.TypeTimestampTZ:
		return true
	case mapping.TypeDecimal:
		switch t.internal {
		case mapping.TypeSmallInt, mapping.TypeInteger, mapping.TypeBigInt, mapping.TypeHugeInt:
			return true
		}
	}
	return false
}

// valueToGo converts an argument value. want is the declared type; for Any
// the value's own type decides. SQL NULL gives nil.
func valueToGo(v mapping.Value, want Type) (any, error) {
	if mapping.IsNullValue(v) {
		return nil, nil
	}
	lt := mapping.GetValueType(v) // owned by the value; not destroyed
	id := mapping.GetTypeId(lt)
	switch want {
	case Varchar:
		return mapping.GetVarchar(v), nil
	case BigInt:
		return mapping.GetInt64(v), nil
	case Double:
		return mapping.GetDouble(v), nil
	case Boolean:
		return mapping.GetBool(v), nil
	case VarcharList:
		if id != mapping.TypeList {
			return nil, fmt.Errorf("expected a list, got %v", typeInfoOf(lt))
		}
		n := int(mapping.GetListSize(v))
		out := make([]string, 0, n)
		for i := range n {
			c := mapping.GetListChild(v, mapping.IdxT(i))
			if mapping.IsNullValue(c) {
				mapping.DestroyValue(&c)
				return nil, fmt.Errorf("list element %d is NULL", i+1)
			}
			out = append(out, mapping.GetVarchar(c))
			mapping.DestroyValue(&c)
		}
		return out, nil
	case Any:
		switch id {
		case mapping.TypeVarchar:
			return mapping.GetVarchar(v), nil
		case mapping.TypeBoolean:
			return mapping.GetBool(v), nil
		case mapping.TypeTinyInt, mapping.TypeSmallInt, mapping.TypeInteger, mapping.TypeBigInt,
			mapping.TypeUTinyInt, mapping.TypeUSmallInt, mapping.TypeUInteger:
			return mapping.GetInt64(v), nil
		case mapping.TypeFloat, mapping.TypeDouble, mapping.TypeDecimal:
			return mapping.GetDouble(v), nil
		case mapping.TypeList:
			return valueToGo(v, VarcharList)
		}
		return nil, fmt.Errorf("unsupported argument type %v", typeInfoOf(lt))
	}
	return nil, fmt.Errorf("argument type %v cannot be read", want)
}

// duckString reads a duckdb_string_t without copying: 16 bytes, a uint32
// length, then up to 12 inlined bytes or (at offset 8) a pointer. The result
// borrows DuckDB's memory.
func duckString(p unsafe.Pointer) string {
	n := *(*uint32)(p)
	if n <= 12 {
		return unsafe.String((*byte)(unsafe.Add(p, 4)), n)
	}
	return unsafe.String(*(**byte)(unsafe.Add(p, 8)), n)
}

// Conversion constants for temporal values.
const (
	microsPerSecond = 1e6
	nanosPerSecond  = 1e9
	millisPerSecond = 1e3
	twoTo64         = 18446744073709551616.0
)

var pow10 = func() (p [39]float64) {
	for i := range p {
		p[i] = math.Pow10(i)
	}
	return
}()
