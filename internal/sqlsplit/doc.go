// Package sqlsplit cuts an SQL script into statements.
//
// A statement ends at a semicolon that is outside a single-quoted string, a
// double-quoted identifier, a dollar-quoted string ($$…$$ or $tag$…$tag$), a line
// comment (-- to the end of the line) and a block comment (/* … */, nested as DuckDB
// nests them). Comments stay in the statement text they belong to, so DuckDB sees the
// script as written.
//
// Lines of the form "--: text" are notes: they are not sent to DuckDB but handed back
// with the statement they precede, so that a script can title its own results. The
// notes after the last statement come back as a final [Statement] with empty SQL.
//
// The package knows nothing of DuckDB's grammar beyond quoting and comments; it does
// not validate SQL.
package sqlsplit
