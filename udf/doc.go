// Package udf is copse's SQL host: it registers the copse_* functions on a DuckDB
// database, reads query results column-wise into the engine (package forest), and keeps
// trained models in a catalog table inside the same database, so a database file carries
// its models.
//
// # Connections
//
// DuckDB registers functions database-wide, so [Open] registers them once. Callbacks
// never use the connection that called them (that deadlocks): nested work — reading a
// training source, writing the catalog — runs on another connection of the host's pool,
// which therefore always has room for more than one. A nested connection sees committed
// data only: a TEMP table or the caller's uncommitted rows are invisible to copse_train,
// and its catalog writes commit on their own (a ROLLBACK of the caller's transaction does
// not undo a training).
//
// # Statement context
//
// DuckDB's callbacks carry no Go context. A caller that wants cancellation (Ctrl-C) and
// progress hands its statement's context to the host with [Host.Attach] before running
// the statement on that connection; training polls it.
//
// # Types
//
// Integers, decimals and floats are numeric; BOOLEAN is 0/1; VARCHAR and ENUM are
// categorical; DATE is days since 1970-01-01 and TIMESTAMP seconds since then. Other
// types (LIST, STRUCT, BLOB, …) are an error naming the column unless it is excluded.
package udf
