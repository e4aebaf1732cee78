package sqlrun

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io"
	"strings"
	"time"

	"github.com/copse-dev/copse/internal/sqlsplit"
)

// Runner runs statements on one connection and writes their results.
type Runner struct {
	Conn   *sql.Conn
	Out    io.Writer // results and notes
	Status io.Writer // "3 rows changed", timings; nil to say nothing
	Format Format

	// Attach, when set, hands each statement's context to the copse host before the
	// statement runs on Conn (udf.Host.Attach), so that cancelling it stops training.
	Attach func(ctx context.Context, conn *sql.Conn) (release func(), err error)
	// Watch, when set, runs beside each statement until ctx is done: the command
	// draws its training progress bar there. Run waits for it to return.
	Watch func(ctx context.Context)
	// Timer makes Run report each statement's wall time on Status.
	Timer bool
	// Now is the clock for Timer; nil means time.Now.
	Now func() time.Time

	results   int  // result sets written so far
	cautioned bool // the reasons caution has been written
}

// reasonsCaution is written (once per Runner, on Status) after a statement that asks
// copse_reasons for the reasons behind scores.
const reasonsCaution = "note: reasons are the inputs that pushed a score most toward an outcome in the model — associations, not causes. " +
	"Reasons given to a person about a decision (credit, pricing, claims) must follow local rules and licensed practice, " +
	"and an adverse decision may need human review."

// StatementError is a statement that failed, with the line where it starts.
type StatementError struct {
	Line int // 1-based line of the script; 0 when unknown
	Err  error
}

func (e *StatementError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("statement at line %d: %v", e.Line, e.Err)
	}
	return e.Err.Error()
}

func (e *StatementError) Unwrap() error { return e.Err }

// Script runs every statement of script in order and stops at the first error, which
// it returns as a *StatementError.
func (r *Runner) Script(ctx context.Context, script string) error {
	for _, st := range sqlsplit.Split(script) {
		if err := r.Statement(ctx, st); err != nil {
			return &StatementError{Line: st.Line, Err: err}
		}
	}
	return nil
}

// Statement prints st's notes (table and markdown formats), runs its SQL and writes
// the result.
func (r *Runner) Statement(ctx context.Context, st sqlsplit.Statement) error {
	if r.Format == FormatTable || r.Format == FormatMarkdown || r.Format == "" {
		for _, n := range st.Notes {
			if _, err := fmt.Fprintln(r.Out, n); err != nil {
				return err
			}
		}
	}
	if st.SQL == "" {
		return nil
	}
	now := r.Now
	if now == nil {
		now = time.Now
	}
	start := now()
	res, err := r.query(ctx, st.SQL)
	if err != nil {
		if ctx.Err() != nil {
			return errors.Join(ctx.Err(), err)
		}
		return err
	}
	elapsed := now().Sub(start)
	if status, ok := statusOnly(st.SQL, res); ok {
		if r.Status != nil && status != "" {
			fmt.Fprintln(r.Status, status)
		}
	} else {
		if r.Format == FormatCSV && r.results > 0 {
			// A blank line between the tables of a multi-statement run.
			if _, err := io.WriteString(r.Out, "\n"); err != nil {
				return err
			}
		}
		r.results++
		if err := write(r.Out, r.Format, res); err != nil {
			return err
		}
	}
	if r.Timer && r.Status != nil {
		fmt.Fprintf(r.Status, "time: %.3f s\n", elapsed.Seconds())
	}
	if !r.cautioned && r.Status != nil && strings.Contains(strings.ToLower(st.SQL), "copse_reasons") {
		r.cautioned = true
		fmt.Fprintln(r.Status, reasonsCaution)
	}
	return nil
}

// query runs one statement and reads its whole result.
func (r *Runner) query(ctx context.Context, q string) (*Result, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	if r.Attach != nil {
		release, err := r.Attach(ctx, r.Conn)
		if err != nil {
			return nil, err
		}
		defer release()
	}
	if r.Watch != nil {
		done := make(chan struct{})
		go func() {
			defer close(done)
			r.Watch(ctx)
		}()
		defer func() { cancel(); <-done }()
	}
	rows, err := r.Conn.QueryContext(ctx, q)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	types, err := rows.ColumnTypes()
	if err != nil {
		return nil, err
	}
	res := &Result{Columns: make([]string, len(types)), Types: make([]string, len(types))}
	for i, t := range types {
		res.Columns[i] = t.Name()
		res.Types[i] = t.DatabaseTypeName()
	}
	ptrs := make([]any, len(types))
	for rows.Next() {
		row := make([]any, len(types))
		for i := range row {
			ptrs[i] = &row[i]
		}
		if err := rows.Scan(ptrs...); err != nil {
			return nil, err
		}
		res.Rows = append(res.Rows, row)
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	return res, nil
}

// commandWords start statements whose result is only a count or a success flag.
var commandWords = map[string]bool{
	"create": true, "drop": true, "alter": true, "insert": true, "update": true, "delete": true,
	"copy": true, "set": true, "reset": true, "attach": true, "detach": true, "use": true,
	"begin": true, "commit": true, "rollback": true, "abort": true, "end": true, "install": true, "load": true,
	"checkpoint": true, "force": true, "vacuum": true, "export": true, "import": true, "truncate": true,
	"comment": true, "analyze": true, "prepare": true, "deallocate": true,
}

// statusOnly reports whether res is DuckDB's bookkeeping answer to a command (a lone
// Count or Success column) rather than data, and the status line to show for it.
func statusOnly(q string, res *Result) (string, bool) {
	if len(res.Columns) == 0 {
		return "ok", true
	}
	if len(res.Columns) != 1 || !commandWords[firstWord(q)] {
		return "", false
	}
	switch res.Columns[0] {
	case "Count":
		if len(res.Rows) == 0 {
			return "ok", true
		}
		if n, ok := res.Rows[0][0].(int64); ok {
			return fmt.Sprintf("ok, %s", rowCount(int(n))), true
		}
	case "Success":
		return "ok", true
	}
	return "", false
}

// firstWord returns the statement's first keyword in lower case, past comments.
func firstWord(q string) string {
	for {
		q = strings.TrimLeft(q, " \t\r\n(")
		switch {
		case strings.HasPrefix(q, "--"):
			i := strings.IndexByte(q, '\n')
			if i < 0 {
				return ""
			}
			q = q[i:]
		case strings.HasPrefix(q, "/*"):
			i := strings.Index(q, "*/")
			if i < 0 {
				return ""
			}
			q = q[i+2:]
		default:
			end := strings.IndexFunc(q, func(r rune) bool {
				return !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r == '_')
			})
			if end < 0 {
				end = len(q)
			}
			return strings.ToLower(q[:end])
		}
	}
}
