package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/peterh/liner"
	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/internal/sqlrun"
	"github.com/copse-dev/copse/internal/sqlsplit"
	"github.com/copse-dev/copse/udf"
)

// ShellOptions are the inputs of `copse shell`.
type ShellOptions struct {
	IO         *IOStreams
	OpenHost   func(ctx context.Context, path string) (*udf.Host, error)
	Interrupts func() (<-chan os.Signal, func())
	// Lines makes the line reader; nil means line editing on a terminal and plain
	// reading of IO.In otherwise.
	Lines func() lineReader

	// Now is the clock for .timer; nil means time.Now.
	Now func() time.Time

	DB      string // database file; "" for a fresh in-memory database
	History string // history file; "" keeps no history
}

// lineReader reads one line of input after showing a prompt.
type lineReader interface {
	// ReadLine returns the next line without its newline, errAbort when the user
	// pressed Ctrl-C at the prompt, or io.EOF at the end of input.
	ReadLine(prompt string) (string, error)
	// Remember adds an entered statement to the history.
	Remember(entry string)
	Close() error
}

var errAbort = errors.New("input aborted")

const (
	promptFirst = "copse> "
	promptMore  = "  ...> "
)

func newShellCmd(d *Deps, runF func(context.Context, *ShellOptions) error) *cobra.Command {
	opts := &ShellOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: d.Interrupts}
	cmd := &cobra.Command{
		Use:   "shell [--db FILE]",
		Short: "Type SQL statements interactively",
		Long: `Type SQL statements and see their results. A statement may span several lines and
runs when a line ends it with ';'. Ctrl-C stops the running statement (a training
included) and returns to the prompt; at the prompt it clears the statement being typed.
Ctrl-D or .quit leaves. Type .help for the shell's own commands.

The history is kept in ~/.copse_history.`,
		Args: argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if home, err := os.UserHomeDir(); err == nil {
				opts.History = filepath.Join(home, ".copse_history")
			}
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runShell(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVar(&opts.DB, "db", "", "DuckDB database `FILE` (created if missing; default: in memory)")
	return cmd
}

const shellHelp = `Statements end with ';' and may span lines. Shell commands:
  .help                  this text
  .timer on|off          show how long each statement took
  .format FORMAT         print results as table, csv, json or markdown
  .quit                  leave (Ctrl-D too)
Ctrl-C stops the running statement; at the prompt it clears the current input.
`

func runShell(ctx context.Context, opts *ShellOptions) error {
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	r, closeConn, err := newRunner(ctx, h, opts.IO, sqlrun.FormatTable)
	if err != nil {
		return err
	}
	defer closeConn()
	r.Now = opts.Now

	var lines lineReader
	if opts.Lines != nil {
		lines = opts.Lines()
	} else if opts.IO.InTTY {
		lines = newEditor(opts.History)
	} else {
		lines = &plainLines{r: bufio.NewReader(opts.IO.In)}
	}
	defer lines.Close()

	// Ctrl-C arrives as a signal while a statement runs (the line editor takes it as a
	// key at the prompt). This session-long subscription keeps a Ctrl-C that comes
	// between statements from ending the shell; each statement subscribes on its own.
	_, stopSession := opts.Interrupts()
	defer stopSession()

	// Input that is not a terminal (a pipe or a file) is a script: as with `copse sql`,
	// the first failing statement or shell command ends the shell with its error (exit
	// code 1, or 130 after Ctrl-C). At a terminal an error is shown and the shell goes on.
	script := !opts.IO.InTTY
	if !script {
		fmt.Fprintln(opts.IO.ErrOut, "copse shell: statements end with ';'. Type .help for help, .quit to leave.")
	}
	// failed reports a statement's error at a terminal and returns nil there; in a
	// script it returns err.
	failed := func(err error) error {
		if script {
			return err
		}
		if errors.Is(err, errInterrupted) {
			fmt.Fprintln(opts.IO.ErrOut, "interrupted")
		} else {
			fmt.Fprintf(opts.IO.ErrOut, "error: %v\n", err)
		}
		return nil
	}
	var pending strings.Builder
	lineNo, first := 0, 0 // the input line just read; the line pending starts on
	for {
		prompt := promptFirst
		if pending.Len() > 0 {
			prompt = promptMore
		}
		line, err := lines.ReadLine(prompt)
		switch {
		case errors.Is(err, errAbort):
			pending.Reset()
			continue
		case errors.Is(err, io.EOF):
			if strings.TrimSpace(pending.String()) != "" {
				if at, err := runStatements(ctx, r, opts.Interrupts, pending.String(), first); err != nil {
					return atLine("statement at line", at, failed(err))
				}
			}
			return nil
		case err != nil:
			return err
		}
		lineNo++
		if pending.Len() == 0 && strings.HasPrefix(strings.TrimSpace(line), ".") {
			lines.Remember(strings.TrimSpace(line))
			quit, err := shellCommand(strings.TrimSpace(line), r, opts.IO.Out)
			switch {
			case err != nil && script:
				return atLine("line", lineNo, err)
			case err != nil:
				fmt.Fprintln(opts.IO.ErrOut, err)
			}
			if quit {
				return nil
			}
			continue
		}
		if pending.Len() == 0 && strings.TrimSpace(line) == "" {
			continue
		}
		if pending.Len() == 0 {
			first = lineNo
		}
		pending.WriteString(line)
		pending.WriteString("\n")
		if !sqlsplit.Complete(pending.String()) {
			continue
		}
		text := pending.String()
		pending.Reset()
		lines.Remember(strings.TrimSpace(text))
		if at, err := runStatements(ctx, r, opts.Interrupts, text, first); err != nil {
			if err := failed(err); err != nil {
				return atLine("statement at line", at, err)
			}
		}
	}
}

// atLine prefixes a script's error with the input line it came from; nil stays nil.
func atLine(what string, line int, err error) error {
	if err == nil {
		return nil
	}
	return fmt.Errorf("%s %d: %w", what, line, err)
}

// runStatements runs the statements of text one by one, each cancelled by a Ctrl-C
// that arrives while it runs (errInterrupted). The first error ends the batch; it comes
// back with the input line its statement starts on (text starts on line first).
func runStatements(ctx context.Context, r *sqlrun.Runner, interrupts func() (<-chan os.Signal, func()), text string, first int) (int, error) {
	for _, st := range sqlsplit.Split(text) {
		stCtx, stop := interruptible(ctx, interrupts)
		err := interruptedErr(stCtx, r.Statement(stCtx, st))
		stop()
		if err != nil {
			return first + st.Line - 1, err
		}
	}
	return 0, nil
}

// shellCommand runs one dot command and reports whether the shell should end; a
// mistake in the command is its error.
func shellCommand(line string, r *sqlrun.Runner, out io.Writer) (quit bool, err error) {
	fields := strings.Fields(line)
	switch fields[0] {
	case ".quit":
		return true, nil
	case ".help":
		fmt.Fprint(out, shellHelp)
	case ".timer":
		if len(fields) != 2 || (fields[1] != "on" && fields[1] != "off") {
			return false, errors.New("usage: .timer on|off")
		}
		r.Timer = fields[1] == "on"
	case ".format":
		if len(fields) != 2 {
			return false, errors.New("usage: .format table|csv|json|markdown")
		}
		f, err := sqlrun.ParseFormat(fields[1])
		if err != nil {
			return false, err
		}
		r.Format = f
	default:
		return false, fmt.Errorf("unknown shell command %s (try .help)", fields[0])
	}
	return false, nil
}

// plainLines reads lines from a non-terminal input, showing no prompt.
type plainLines struct{ r *bufio.Reader }

func (p *plainLines) ReadLine(string) (string, error) {
	line, err := p.r.ReadString('\n')
	if err != nil && (line == "" || !errors.Is(err, io.EOF)) {
		return "", err
	}
	return strings.TrimRight(line, "\r\n"), nil
}

func (p *plainLines) Remember(string) {}
func (p *plainLines) Close() error    { return nil }

// editor reads lines on a terminal with line editing and a history file.
type editor struct {
	st      *liner.State
	history string
}

func newEditor(history string) *editor {
	e := &editor{st: liner.NewLiner(), history: history}
	e.st.SetCtrlCAborts(true)
	e.st.SetMultiLineMode(true)
	if history != "" {
		if f, err := os.Open(history); err == nil {
			e.st.ReadHistory(f)
			f.Close()
		}
	}
	return e
}

func (e *editor) ReadLine(prompt string) (string, error) {
	line, err := e.st.Prompt(prompt)
	if errors.Is(err, liner.ErrPromptAborted) {
		return "", errAbort
	}
	return line, err
}

func (e *editor) Remember(entry string) {
	// A statement typed over several lines comes back as one line: liner keeps one
	// history entry per line of its file (a newline would split the entry at the next
	// start) and draws the line being edited as one run of glyphs (a newline in it
	// would garble the display). Joined, a "--" comment runs on to the end of the
	// entry; edit such an entry before running it again.
	e.st.AppendHistory(strings.ReplaceAll(entry, "\n", " "))
}

func (e *editor) Close() error {
	if e.history != "" {
		if f, err := os.OpenFile(e.history, os.O_CREATE|os.O_WRONLY|os.O_TRUNC, 0o600); err == nil {
			e.st.WriteHistory(f)
			f.Close()
		}
	}
	return e.st.Close()
}
