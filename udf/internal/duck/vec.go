package duck

import (
	"fmt"
	"math"
	"unsafe"

	"github.com/duckdb/duckdb-go/v2/mapping"
)

// Vec is a read-only, zero-copy view of a flat DuckDB vector inside a
// callback. Its memory belongs to DuckDB and is valid only until the
// callback returns; a Vec must not be kept.
type Vec struct {
	Type *TypeInfo
	n    int
	data unsafe.Pointer
	mask []uint64 // validity bits, 1 = valid; nil = all valid
}

func vecOf(v mapping.Vector, t *TypeInfo, n int) Vec {
	out := Vec{Type: t, n: n, data: mapping.VectorGetData(v)}
	if m := mapping.VectorGetValidity(v); m != nil && n > 0 {
		out.mask = unsafe.Slice((*uint64)(m), (n+63)/64)
	}
	return out
}

// Len is the number of rows.
func (v Vec) Len() int { return v.n }

// Valid reports whether row i is not NULL.
func (v Vec) Valid(i int) bool {
	return v.mask == nil || v.mask[i>>6]>>(uint(i)&63)&1 == 1
}

// String returns row i of a VARCHAR vector, borrowing DuckDB's bytes (copy
// it with strings.Clone to keep it), and false for NULL. It panics if the
// vector is not VARCHAR or i is out of range.
func (v Vec) String(i int) (string, bool) {
	if v.Type.ID != mapping.TypeVarchar {
		panic(fmt.Sprintf("duck: String on a %v vector", v.Type))
	}
	if uint(i) >= uint(v.n) {
		panic(fmt.Sprintf("duck: row %d out of range [0,%d)", i, v.n))
	}
	if !v.Valid(i) {
		return "", false
	}
	return duckString(unsafe.Add(v.data, i*16)), true
}

// Float64s converts the vector into dst[:v.Len()], writing NaN for NULL.
// Units: BOOLEAN → 0/1, DATE → days since 1970-01-01, TIMESTAMP (any
// precision, also WITH TIME ZONE) → seconds since the epoch, DECIMAL →
// value / 10^scale as DuckDB casts it. Other types give an error.
func (v Vec) Float64s(dst []float64) error {
	dst = dst[:v.n]
	if v.n == 0 {
		return nil
	}
	p := v.data
	switch v.Type.ID {
	case mapping.TypeDouble:
		copy(dst, unsafe.Slice((*float64)(p), v.n))
	case mapping.TypeFloat:
		conv[float32](dst, p, 1)
	case mapping.TypeBoolean, mapping.TypeUTinyInt:
		conv[uint8](dst, p, 1)
	case mapping.TypeTinyInt:
		conv[int8](dst, p, 1)
	case mapping.TypeSmallInt:
		conv[int16](dst, p, 1)
	case mapping.TypeUSmallInt:
		conv[uint16](dst, p, 1)
	case mapping.TypeInteger, mapping.TypeDate:
		conv[int32](dst, p, 1)
	case mapping.TypeUInteger:
		conv[uint32](dst, p, 1)
	case mapping.TypeBigInt, mapping.TypeTimestampS:
		conv[int64](dst, p, 1)
	case mapping.TypeUBigInt:
		conv[uint64](dst, p, 1)
	case mapping.TypeTimestamp, mapping.TypeTimestampTZ:
		conv[int64](dst, p, microsPerSecond)
	case mapping.TypeTimestampMS:
		conv[int64](dst, p, millisPerSecond)
	case mapping.TypeTimestampNS:
		conv[int64](dst, p, nanosPerSecond)
	case mapping.TypeHugeInt:
		convHuge(dst, p, 1)
	case mapping.TypeDecimal:
		div := pow10[v.Type.Scale]
		switch v.Type.internal {
		case mapping.TypeSmallInt:
			conv[int16](dst, p, div)
		case mapping.TypeInteger:
			conv[int32](dst, p, div)
		case mapping.TypeBigInt:
			conv[int64](dst, p, div)
		case mapping.TypeHugeInt:
			convHuge(dst, p, div)
		default:
			return fmt.Errorf("duck: unsupported %v storage", v.Type)
		}
	default:
		return fmt.Errorf("duck: cannot convert %v to a number", v.Type)
	}
	v.nullsToNaN(dst)
	return nil
}

func (v Vec) nullsToNaN(dst []float64) {
	if v.mask == nil {
		return
	}
	nan := math.NaN()
	for w, bits := range v.mask {
		if bits == math.MaxUint64 {
			continue
		}
		end := min((w+1)*64, v.n)
		for i := w * 64; i < end; i++ {
			if bits>>(uint(i)&63)&1 == 0 {
				dst[i] = nan
			}
		}
	}
}

type number interface {
	~int8 | ~int16 | ~int32 | ~int64 | ~uint8 | ~uint16 | ~uint32 | ~uint64 | ~float32
}

// conv widens n values of T at p into dst, dividing by div when it is not 1
// (division, not multiplication by 1/div, to round like DuckDB's casts).
func conv[T number](dst []float64, p unsafe.Pointer, div float64) {
	src := unsafe.Slice((*T)(p), len(dst))
	if div == 1 {
		for i, x := range src {
			dst[i] = float64(x)
		}
		return
	}
	for i, x := range src {
		dst[i] = float64(x) / div
	}
}

// convHuge converts 128-bit integers stored as {lower uint64, upper int64}.
// Negative values are negated first so that small ones (upper = -1) do not
// lose their low bits to cancellation.
func convHuge(dst []float64, p unsafe.Pointer, div float64) {
	src := unsafe.Slice((*[2]uint64)(p), len(dst))
	for i, x := range src {
		lo, hi := x[0], x[1]
		neg := int64(hi) < 0
		if neg {
			lo, hi = ^lo+1, ^hi
			if lo == 0 {
				hi++
			}
		}
		f := float64(hi)*twoTo64 + float64(lo)
		if neg {
			f = -f
		}
		dst[i] = f / div
	}
}
