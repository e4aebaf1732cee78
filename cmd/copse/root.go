package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"

	"github.com/spf13/cobra"
	"golang.org/x/term"

	"github.com/copse-dev/copse/internal/sqlrun"
	"github.com/copse-dev/copse/udf"
)

// Exit codes, chosen in one place.
const (
	exitOK          = 0
	exitError       = 1   // a statement or the command failed
	exitUsage       = 2   // bad flags or arguments
	exitInterrupted = 130 // stopped by Ctrl-C (128 + SIGINT, as shells count)
)

// version is set at link time (-ldflags "-X main.version=v1.2.3"); otherwise the
// module version from the build information is used.
var version = ""

// IOStreams are the command's standard streams and what is known about them.
type IOStreams struct {
	In     io.Reader
	Out    io.Writer
	ErrOut io.Writer
	InTTY  bool // standard input is a terminal
	ErrTTY bool // standard error is a terminal: progress bars are drawn there
	// ErrWidth is standard error's width in columns when it is a terminal, else 0.
	ErrWidth int
}

// Deps are what commands need from the outside world; tests replace them.
type Deps struct {
	IO *IOStreams
	// OpenHost opens a database ("" for in-memory) with the copse functions.
	OpenHost func(ctx context.Context, path string) (*udf.Host, error)
	// Interrupts delivers Ctrl-C presses until stop is called.
	Interrupts func() (ch <-chan os.Signal, stop func())
	// Version is the copse version shown by `copse version`.
	Version string
}

func systemDeps() *Deps {
	ios := &IOStreams{
		In: os.Stdin, Out: os.Stdout, ErrOut: os.Stderr,
		InTTY:  term.IsTerminal(int(os.Stdin.Fd())),
		ErrTTY: term.IsTerminal(int(os.Stderr.Fd())),
	}
	if ios.ErrTTY {
		if w, _, err := term.GetSize(int(os.Stderr.Fd())); err == nil {
			ios.ErrWidth = w
		}
	}
	return &Deps{
		IO:         ios,
		OpenHost:   udf.Open,
		Interrupts: osInterrupts,
		Version:    buildVersion(),
	}
}

func osInterrupts() (<-chan os.Signal, func()) {
	ch := make(chan os.Signal, 1)
	signal.Notify(ch, os.Interrupt)
	return ch, func() { signal.Stop(ch) }
}

func buildVersion() string {
	if version != "" {
		return version
	}
	if info, ok := debug.ReadBuildInfo(); ok && info.Main.Version != "" && info.Main.Version != "(devel)" {
		return info.Main.Version
	}
	return "devel"
}

// Main runs the command with the process's arguments and streams and returns the exit
// code.
func Main() int {
	return run(systemDeps(), os.Args[1:])
}

// run builds the command tree on deps, runs it with args, prints an error once and
// maps it to an exit code.
func run(d *Deps, args []string) int {
	return execute(d, newRootCmd(d), args)
}

// execute runs root with args on d's streams.
func execute(d *Deps, root *cobra.Command, args []string) int {
	root.SetArgs(args)
	root.SetIn(d.IO.In)
	root.SetOut(d.IO.Out)
	root.SetErr(d.IO.ErrOut)
	err := root.ExecuteContext(context.Background())
	if err == nil {
		return exitOK
	}
	var usage *usageError
	switch {
	case errors.As(err, &usage):
		fmt.Fprintf(d.IO.ErrOut, "copse: %v\n", usage.err)
		fmt.Fprintf(d.IO.ErrOut, "Run '%s --help' for usage.\n", usage.cmd)
		return exitUsage
	case errors.Is(err, errInterrupted):
		fmt.Fprintln(d.IO.ErrOut, "copse: interrupted")
		return exitInterrupted
	default:
		fmt.Fprintf(d.IO.ErrOut, "copse: %v\n", err)
		return exitError
	}
}

// usageError is a mistake in how the command was called.
type usageError struct {
	cmd string // the command path, e.g. "copse sql"
	err error
}

func (e *usageError) Error() string { return e.err.Error() }
func (e *usageError) Unwrap() error { return e.err }

func usageErrorf(cmd *cobra.Command, format string, a ...any) error {
	return &usageError{cmd: cmd.CommandPath(), err: fmt.Errorf(format, a...)}
}

// errInterrupted reports a run stopped by Ctrl-C.
var errInterrupted = errors.New("interrupted")

// argsUsage wraps a cobra argument check so that its failure is a usage error.
func argsUsage(check cobra.PositionalArgs) cobra.PositionalArgs {
	return func(cmd *cobra.Command, args []string) error {
		if err := check(cmd, args); err != nil {
			return &usageError{cmd: cmd.CommandPath(), err: err}
		}
		return nil
	}
}

func newRootCmd(d *Deps) *cobra.Command {
	return newRoot(
		newVersionCmd(d, nil),
		newSQLCmd(d, nil),
		newShellCmd(d, nil),
		newDemoCmd(d, nil),
		newPlotCmd(d, nil),
		newServeCmd(d, nil),
		newModelCmd(d, nil, nil),
		newExportCmd(d, nil),
	)
}

// newRoot makes the top command with the given subcommands.
func newRoot(subs ...*cobra.Command) *cobra.Command {
	root := &cobra.Command{
		Use:   "copse",
		Short: "Tree ensembles inside SQL on DuckDB",
		Long: `copse trains random forests, bagged trees and single trees on a query's result,
keeps the models in the database beside the data, and scores whole tables in one query.

Start with 'copse demo'.`,
		SilenceErrors: true,
		SilenceUsage:  true,
		Args: func(cmd *cobra.Command, args []string) error {
			if len(args) > 0 {
				return usageErrorf(cmd, "unknown command %q", args[0])
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			return cmd.Help()
		},
	}
	root.CompletionOptions.DisableDefaultCmd = true
	root.SetFlagErrorFunc(func(cmd *cobra.Command, err error) error {
		return &usageError{cmd: cmd.CommandPath(), err: err}
	})
	root.AddCommand(subs...)
	return root
}

// jobsOf adapts the host's job list to the progress bar.
func jobsOf(h *udf.Host) func() []sqlrun.Job {
	return func() []sqlrun.Job {
		jobs := h.Jobs()
		out := make([]sqlrun.Job, len(jobs))
		for i, j := range jobs {
			out[i] = sqlrun.Job{Model: j.Model, Stage: j.Stage, TreesDone: j.TreesDone, Trees: j.Trees, Started: j.Started}
		}
		return out
	}
}

// newRunner prepares a runner on a fresh connection of h: statement contexts are
// attached to the host, and a progress bar is drawn when standard error is a terminal.
// close releases the connection.
func newRunner(ctx context.Context, h *udf.Host, ios *IOStreams, f sqlrun.Format) (r *sqlrun.Runner, close func(), err error) {
	conn, err := h.DB().Conn(ctx)
	if err != nil {
		return nil, nil, err
	}
	r = &sqlrun.Runner{Conn: conn, Out: ios.Out, Status: ios.ErrOut, Format: f, Attach: h.Attach}
	if ios.ErrTTY {
		p := &sqlrun.Progress{Jobs: jobsOf(h), W: ios.ErrOut, Width: ios.ErrWidth}
		r.Watch = p.Watch
	}
	return r, func() { conn.Close() }, nil
}

// interruptible returns a context that is cancelled by the first Ctrl-C, and a stop
// function that must be called when the work is done.
func interruptible(ctx context.Context, interrupts func() (<-chan os.Signal, func())) (context.Context, func()) {
	ctx, cancel := context.WithCancel(ctx)
	ch, stopSignals := interrupts()
	select {
	case <-ch: // pressed before the work began
		cancel()
	default:
	}
	done := make(chan struct{})
	go func() {
		select {
		case <-ch:
			cancel()
		case <-done:
		}
	}()
	return ctx, func() {
		close(done)
		stopSignals()
		cancel()
	}
}

// interruptedErr turns an error caused by a cancelled ctx into errInterrupted, keeping
// the original message.
func interruptedErr(ctx context.Context, err error) error {
	if err != nil && ctx.Err() != nil {
		return fmt.Errorf("%w: %v", errInterrupted, err)
	}
	return err
}
