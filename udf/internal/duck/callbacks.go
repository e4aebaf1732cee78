package duck

import "C"

import (
	"fmt"
	"path/filepath"
	"runtime"
	"strings"
	"unsafe"

	"github.com/duckdb/duckdb-go/v2/mapping"
)

// guard runs f and turns a panic into an error, because a Go panic that
// unwinds into DuckDB's C++ frames kills the process.
func guard(f func() error) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("internal error: %v (at %s)", r, panicSite())
		}
	}()
	return f()
}

// panicSite names the first frame outside the runtime, where the panic
// happened, so the SQL error points at the bug without a whole stack dump.
func panicSite() string {
	pc := make([]uintptr, 32)
	frames := runtime.CallersFrames(pc[:runtime.Callers(3, pc)])
	for {
		fr, more := frames.Next()
		if !strings.HasPrefix(fr.Function, "runtime.") {
			return fmt.Sprintf("%s %s:%d", fr.Function, filepath.Base(fr.File), fr.Line)
		}
		if !more {
			return "unknown"
		}
	}
}

//export copse_table_bind
func copse_table_bind(p unsafe.Pointer) {
	info := mapping.BindInfo{Ptr: p}
	if err := guard(func() error { return tableBind(info) }); err != nil {
		mapping.BindSetError(info, err.Error())
	}
}

//export copse_table_init
func copse_table_init(p unsafe.Pointer) {
	info := mapping.InitInfo{Ptr: p}
	if err := guard(func() error { return tableInit(info) }); err != nil {
		mapping.InitSetError(info, err.Error())
	}
}

//export copse_table_fill
func copse_table_fill(p, out unsafe.Pointer) {
	info := mapping.FunctionInfo{Ptr: p}
	if err := guard(func() error { return tableFill(info, mapping.DataChunk{Ptr: out}) }); err != nil {
		mapping.FunctionSetError(info, err.Error())
	}
}

//export copse_scalar_bind
func copse_scalar_bind(p unsafe.Pointer) {
	info := mapping.BindInfo{Ptr: p}
	if err := guard(func() error { return scalarBind(info) }); err != nil {
		mapping.ScalarFunctionBindSetError(info, err.Error())
	}
}

//export copse_scalar_exec
func copse_scalar_exec(p, in, out unsafe.Pointer) {
	info := mapping.FunctionInfo{Ptr: p}
	if err := guard(func() error {
		return scalarExec(info, mapping.DataChunk{Ptr: in}, mapping.Vector{Ptr: out})
	}); err != nil {
		mapping.ScalarFunctionSetError(info, err.Error())
	}
}
