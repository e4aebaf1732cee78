package main

import (
	"context"
	"io"
	"os"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/internal/sqlrun"
	"github.com/copse-dev/copse/udf"
)

// SQLOptions are the inputs of `copse sql`.
type SQLOptions struct {
	IO       *IOStreams
	OpenHost func(ctx context.Context, path string) (*udf.Host, error)
	// Interrupts delivers Ctrl-C presses (see Deps).
	Interrupts func() (<-chan os.Signal, func())

	DB     string        // database file; "" for a fresh in-memory database
	Format sqlrun.Format // output format
	Inline string        // statements given with -c
	File   string        // script file; "-" for standard input; "" when Inline is used
}

func newSQLCmd(d *Deps, runF func(context.Context, *SQLOptions) error) *cobra.Command {
	opts := &SQLOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: d.Interrupts}
	var format string
	cmd := &cobra.Command{
		Use:   "sql [--db FILE] [--format FORMAT] (-c SQL | FILE | -)",
		Short: "Run SQL statements and print their results",
		Long: `Run the statements given with -c, in FILE, or on standard input ('-', or no argument
when standard input is not a terminal), in order, printing each result. The first failing
statement stops the run with a non-zero exit code. Ctrl-C stops the running statement,
a training included.

Lines of the form '--: text' in a script are printed (table and markdown formats) before
the next statement's result.`,
		Example: `  copse sql -c "SELECT * FROM copse_models()"
  copse sql --db sales.duckdb --format csv report.sql > report.csv
  echo "SELECT 42 AS answer;" | copse sql -`,
		Args: argsUsage(cobra.MaximumNArgs(1)),
		RunE: func(cmd *cobra.Command, args []string) error {
			f, err := sqlrun.ParseFormat(format)
			if err != nil {
				return usageErrorf(cmd, "%v", err)
			}
			opts.Format = f
			inlineSet := cmd.Flags().Changed("statements")
			switch {
			case inlineSet && len(args) > 0:
				return usageErrorf(cmd, "give statements with -c or as a file, not both")
			case len(args) == 1:
				opts.File = args[0]
			case !inlineSet && opts.IO.InTTY:
				return usageErrorf(cmd, "no statements: give -c SQL, a FILE, or - for standard input (or try 'copse shell')")
			case !inlineSet:
				opts.File = "-"
			}
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runSQL(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVar(&opts.DB, "db", "", "DuckDB database `FILE` (created if missing; default: in memory)")
	cmd.Flags().StringVar(&format, "format", string(sqlrun.FormatTable), "output `FORMAT`: table, csv, json or markdown")
	cmd.Flags().StringVarP(&opts.Inline, "statements", "c", "", "run the `SQL` statements given here")
	return cmd
}

func runSQL(ctx context.Context, opts *SQLOptions) error {
	script := opts.Inline
	switch opts.File {
	case "":
	case "-":
		b, err := io.ReadAll(opts.IO.In)
		if err != nil {
			return err
		}
		script = string(b)
	default:
		b, err := os.ReadFile(opts.File)
		if err != nil {
			return err
		}
		script = string(b)
	}
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	// From here on, Ctrl-C stops the running statement (or the data generation)
	// instead of the process.
	ctx, stop := interruptible(ctx, opts.Interrupts)
	defer stop()
	r, closeConn, err := newRunner(ctx, h, opts.IO, opts.Format)
	if err != nil {
		return interruptedErr(ctx, err)
	}
	defer closeConn()
	return interruptedErr(ctx, r.Script(ctx, script))
}
