package duck

import (
	"fmt"
	"unsafe"

	"github.com/duckdb/duckdb-go/v2/mapping"
)

// EnumCodes writes the ENUM vector's codes (indexes into Type.Levels) into
// dst[:v.Len()], -1 for NULL. It returns an error for other types.
func (v Vec) EnumCodes(dst []int32) error {
	if v.Type.ID != mapping.TypeEnum {
		return fmt.Errorf("duck: EnumCodes on a %v vector", v.Type)
	}
	dst = dst[:v.n]
	if v.n == 0 {
		return nil
	}
	switch v.Type.internal {
	case mapping.TypeUTinyInt:
		widen(dst, unsafe.Slice((*uint8)(v.data), v.n))
	case mapping.TypeUSmallInt:
		widen(dst, unsafe.Slice((*uint16)(v.data), v.n))
	case mapping.TypeUInteger:
		widen(dst, unsafe.Slice((*uint32)(v.data), v.n))
	default:
		return fmt.Errorf("duck: enum storage %d", v.Type.internal)
	}
	for i := range dst {
		if !v.Valid(i) {
			dst[i] = -1
		}
	}
	return nil
}
