package duck

/*
#include <stdint.h>
#include <stdlib.h>

// Callbacks exported from Go (callbacks.go). DuckDB's handle types are all
// pointers, so void * keeps this file free of duckdb.h.
void copse_delete_slot(void *);
void *copse_copy_slot(void *);
void copse_table_bind(void *);
void copse_table_init(void *);
void copse_table_fill(void *, void *);
void copse_scalar_bind(void *);
void copse_scalar_exec(void *, void *, void *);

typedef void (*copse_delete_t)(void *);
typedef void *(*copse_copy_t)(void *);
typedef void (*copse_bind_t)(void *);
typedef void (*copse_table_fill_t)(void *, void *);
typedef void (*copse_scalar_exec_t)(void *, void *, void *);
*/
import "C"

import (
	"runtime/cgo"
	"unsafe"
)

// C function pointers of our callbacks, for the mapping.*Set* calls.
var (
	cbDeleteSlot = unsafe.Pointer(C.copse_delete_t(C.copse_delete_slot))
	cbCopySlot   = unsafe.Pointer(C.copse_copy_t(C.copse_copy_slot))
	cbTableBind  = unsafe.Pointer(C.copse_bind_t(C.copse_table_bind))
	cbTableInit  = unsafe.Pointer(C.copse_bind_t(C.copse_table_init))
	cbTableFill  = unsafe.Pointer(C.copse_table_fill_t(C.copse_table_fill))
	cbScalarBind = unsafe.Pointer(C.copse_bind_t(C.copse_scalar_bind))
	cbScalarExec = unsafe.Pointer(C.copse_scalar_exec_t(C.copse_scalar_exec))
)

// newSlot stores a handle to v in C memory, so DuckDB can own the pointer
// without holding a Go pointer. DuckDB frees it through cbDeleteSlot.
func newSlot(v any) unsafe.Pointer {
	p := C.malloc(C.size_t(unsafe.Sizeof(uintptr(0))))
	*(*uintptr)(p) = uintptr(cgo.NewHandle(v))
	return p
}

// slotValue returns the Go value behind a slot made by newSlot.
func slotValue(p unsafe.Pointer) any {
	return cgo.Handle(*(*uintptr)(p)).Value()
}

//export copse_delete_slot
func copse_delete_slot(p unsafe.Pointer) {
	if p == nil {
		return
	}
	cgo.Handle(*(*uintptr)(p)).Delete()
	C.free(p)
}

// copse_copy_slot gives DuckDB its own slot for copied scalar bind data; the
// Go value is shared because bind state is read-only after bind.
//
//export copse_copy_slot
func copse_copy_slot(p unsafe.Pointer) unsafe.Pointer {
	return newSlot(slotValue(p))
}
