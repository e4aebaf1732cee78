// Package duck is the raw DuckDB layer under the SQL host: it registers table
// and scalar functions through DuckDB's C API and reads query results chunk by
// chunk, bypassing the parts of duckdb-go's public API that are too limited or
// too slow for us (see shared/notes/duckdb-go-udf.md):
//
//   - table functions with optional named arguments and LIST(VARCHAR) arguments
//     ([RegisterTable]);
//   - scalar functions whose bind sees argument types and STRUCT field names,
//     and whose executor reads DuckDB's vectors without copying
//     ([RegisterScalar]);
//   - a column reader that is 3–5× faster than Rows.Scan ([ReadColumns]).
//
// The only private driver detail used is the raw connection handle inside
// *duckdb.Conn, guarded by [CheckLayout]. Everything else goes through the
// public package github.com/duckdb/duckdb-go/v2/mapping, which tracks the
// DuckDB C API exactly; tests pin the driver version.
//
// Conventions: every callback recovers panics and reports them, like returned
// errors, as SQL errors. Memory handed to callbacks (vectors, borrowed
// strings) belongs to DuckDB and is valid only until the callback returns.
// Functions are registered database-wide, outlive the registering connection
// and cannot be dropped; registering the same name and signature again
// replaces the function.
//
// The package does no learning and knows no SQL function names of its own.
package duck
