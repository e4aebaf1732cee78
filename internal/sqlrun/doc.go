// Package sqlrun runs SQL statements and scripts on a DuckDB connection and writes
// their results in one of the command's output formats (table, csv, json, markdown).
//
// It is the part of `copse sql`, `copse shell` and `copse demo` that does not depend
// on the command line: a [Runner] holds one connection, hands each statement's context
// to the copse host (so Ctrl-C stops a training), optionally draws a progress bar, and
// renders every result set. Scripts are cut with package sqlsplit; their note lines
// ("--: text") are printed before the result they precede, in the table and markdown
// formats.
//
// Results are written as they come; a Runner is not safe for concurrent use.
package sqlrun
