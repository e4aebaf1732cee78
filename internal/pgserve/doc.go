// Package pgserve serves a copse host over the PostgreSQL wire protocol (version 3), so
// that psql, Postgres drivers, notebooks and BI tools run the copse SQL functions on a
// shared DuckDB database.
//
// The protocol framing, the simple and extended query flows (Parse, Bind, Describe,
// Execute, Sync, Close), TLS negotiation and the cancel-request handshake come from
// github.com/jeroenrinzema/psql-wire; this package adds what is ours: one DuckDB
// connection per client session, statement descriptions from DuckDB's prepared
// statements, the mapping of DuckDB types to PostgreSQL type OIDs, SQLSTATE codes for
// DuckDB and copse errors, SCRAM-SHA-256 password checks, the connection limit, the
// statement timeout, cancellation through each statement's context and a bounded drain
// on shutdown.
//
// It does not emulate PostgreSQL's catalog or its SQL dialect: statements are DuckDB
// SQL, run as sent (DuckDB reads $1 placeholders itself). Lists, maps and structs are
// sent as JSON text. COPY and LISTEN are not served.
package pgserve
