package pgserve

import (
	"context"
	"errors"
	"strings"

	"github.com/duckdb/duckdb-go/v2"
	"github.com/jeroenrinzema/psql-wire/codes"
	psqlerr "github.com/jeroenrinzema/psql-wire/errors"
)

// SQLSTATE codes sent by the server (PostgreSQL's Appendix A, "PostgreSQL Error Codes").
const (
	stateSyntax          = codes.Code("42601") // syntax_error
	stateUndefinedTable  = codes.Code("42P01") // undefined_table
	stateUndefinedColumn = codes.Code("42703") // undefined_column
	stateUndefinedObject = codes.Code("42704") // undefined_object
	stateUndefinedFunc   = codes.Code("42883") // undefined_function
	stateInvalidParam    = codes.Code("22023") // invalid_parameter_value: copse's call errors
	stateConversion      = codes.Code("22P02") // invalid_text_representation
	stateOutOfRange      = codes.Code("22003") // numeric_value_out_of_range
	stateDivisionByZero  = codes.Code("22012") // division_by_zero
	stateConstraint      = codes.Code("23000") // integrity_constraint_violation
	stateReadOnly        = codes.Code("25006") // read_only_sql_transaction
	stateTxAborted       = codes.Code("25P02") // in_failed_sql_transaction
	stateSerialization   = codes.Code("40001") // serialization_failure
	stateCanceled        = codes.Code("57014") // query_canceled
	stateAdminShutdown   = codes.Code("57P01") // admin_shutdown
	stateAuthFailed      = codes.Code("28P01") // invalid_password
	stateTooMany         = codes.Code("53300") // too_many_connections
	stateProtocol        = codes.Code("08P01") // protocol_violation
	stateFeature         = codes.Code("0A000") // feature_not_supported
	stateNoMemory        = codes.Code("53200") // out_of_memory
	stateIO              = codes.Code("58030") // io_error
	stateInternal        = codes.Code("XX000") // internal_error
)

// Causes of a stopped statement, read back with context.Cause.
var (
	errCancelRequest    = errors.New("canceling statement due to user request")
	errStatementTimeout = errors.New("canceling statement due to statement timeout")
	errShutdown         = errors.New("terminating statement because the server is shutting down")
	errClientGone       = errors.New("canceling statement because the client went away")
)

// withState gives err the SQLSTATE that fits it. A statement stopped through its
// context (cancel request, timeout, shutdown) reports why, with DuckDB's own message as
// the detail; other DuckDB errors keep DuckDB's message and get a code from DuckDB's
// error type.
func withState(ctx context.Context, err error) error {
	if err == nil {
		return nil
	}
	if ctx.Err() != nil {
		cause := context.Cause(ctx)
		code := stateCanceled
		if errors.Is(cause, errShutdown) {
			code = stateAdminShutdown
		}
		if !errors.Is(cause, errCancelRequest) && !errors.Is(cause, errStatementTimeout) && !errors.Is(cause, errShutdown) && !errors.Is(cause, errClientGone) {
			cause = errCancelRequest
		}
		return psqlerr.WithDetail(psqlerr.WithCode(cause, code), err.Error())
	}
	return psqlerr.WithCode(err, stateOf(err))
}

// stateOf picks a SQLSTATE for a DuckDB error.
func stateOf(err error) codes.Code {
	var de *duckdb.Error
	if !errors.As(err, &de) {
		return stateInternal
	}
	msg := de.Msg
	if strings.Contains(msg, "read-only mode") {
		return stateReadOnly
	}
	switch de.Type {
	case duckdb.ErrorTypeParser, duckdb.ErrorTypeSyntax:
		return stateSyntax
	case duckdb.ErrorTypeCatalog:
		switch {
		case strings.Contains(msg, "Table with name"), strings.Contains(msg, "Table Function with name"):
			return stateUndefinedTable
		case strings.Contains(msg, "Function with name"):
			return stateUndefinedFunc
		}
		return stateUndefinedObject
	case duckdb.ErrorTypeBinder:
		switch {
		case isCopseError(msg):
			return stateInvalidParam
		case strings.Contains(msg, "Referenced column"):
			return stateUndefinedColumn
		case strings.Contains(msg, "No function matches"):
			return stateUndefinedFunc
		}
		return stateSyntax
	case duckdb.ErrorTypeInvalidInput:
		return stateInvalidParam
	case duckdb.ErrorTypeConversion, duckdb.ErrorTypeMismatchType, duckdb.ErrorTypeInvalidType:
		return stateConversion
	case duckdb.ErrorTypeOutOfRange:
		return stateOutOfRange
	case duckdb.ErrorTypeDivideByZero:
		return stateDivisionByZero
	case duckdb.ErrorTypeConstraint:
		return stateConstraint
	case duckdb.ErrorTypePermission:
		return stateReadOnly
	case duckdb.ErrorTypeTransaction:
		if strings.Contains(msg, "aborted") {
			return stateTxAborted
		}
		return stateSerialization
	case duckdb.ErrorTypeInterrupt:
		return stateCanceled
	case duckdb.ErrorTypeNotImplemented:
		return stateFeature
	case duckdb.ErrorTypeOutOfMemory:
		return stateNoMemory
	case duckdb.ErrorTypeIO:
		return stateIO
	case duckdb.ErrorTypeParameterNotResolved, duckdb.ErrorTypeParameterNotAllowed:
		return stateProtocol
	}
	if isCopseError(msg) {
		return stateInvalidParam
	}
	return stateInternal
}

// isCopseError reports whether a DuckDB message comes from a copse function: every
// copse error names the function first ("copse_train \"m\": ...").
func isCopseError(msg string) bool {
	return strings.HasPrefix(msg, "copse_") || strings.Contains(msg, "Error: copse_")
}
