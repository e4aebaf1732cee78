// Command copse puts tree ensembles inside SQL on DuckDB.
//
//	copse demo      the built-in example on invented invoices (sql/demo.sql)
//	copse sql       run statements from -c, a file or standard input
//	copse shell     type statements interactively
//	copse version   versions of copse, Go and DuckDB
//
// The package is wiring only: each command has a file with an options struct, a
// constructor that takes the dependencies ([Deps]) and an optional run hook for tests,
// and a run function. Statement running and result rendering live in internal/sqlrun,
// the demo data in internal/demodata and internal/demodb, the SQL functions in udf.
// Errors are printed once, in [Main], and mapped to exit codes there: 1 for a failure,
// 2 for a usage mistake, 130 after Ctrl-C.
package main
