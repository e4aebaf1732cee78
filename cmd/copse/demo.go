package main

import (
	"context"
	"fmt"
	"os"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/internal/demodata"
	"github.com/copse-dev/copse/internal/demodb"
	"github.com/copse-dev/copse/internal/sqlrun"
	scripts "github.com/copse-dev/copse/sql"
	"github.com/copse-dev/copse/udf"
)

// DemoOptions are the inputs of `copse demo`.
type DemoOptions struct {
	IO         *IOStreams
	OpenHost   func(ctx context.Context, path string) (*udf.Host, error)
	Interrupts func() (<-chan os.Signal, func())

	DB     string // keep the demo's tables and models in this database file; "" for memory
	Script string // the demo script (sql/demo.sql, embedded)
}

func newDemoCmd(d *Deps, runF func(context.Context, *DemoOptions) error) *cobra.Command {
	opts := &DemoOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: d.Interrupts, Script: scripts.Demo}
	cmd := &cobra.Command{
		Use:   "demo [--db FILE]",
		Short: "Run the built-in example: late invoices of an invented distributor",
		Long: fmt.Sprintf(`Build an invented data set — %d invoices of a fictional wholesale distributor, whose
lateness follows a known rule, and %d new invoices to score — then run the demo script
(sql/demo.sql): train a random forest, read its out-of-bag error and feature importance,
score the new invoices, train a gradient-boosted model beside it and compare the two on
the new invoices' known outcomes, and list the models.

With --db the tables and models are kept in FILE (which must not hold them already), so
that the recipes in sql/ can be run on it afterwards with 'copse sql --db FILE'.`, demodata.TrainRows, demodata.NewRows),
		Args: argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runDemo(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVar(&opts.DB, "db", "", "keep the demo's tables and models in database `FILE`")
	return cmd
}

func runDemo(ctx context.Context, opts *DemoOptions) error {
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	// From here on, Ctrl-C stops the running statement (or the data generation)
	// instead of the process.
	ctx, stop := interruptible(ctx, opts.Interrupts)
	defer stop()
	fmt.Fprintf(opts.IO.ErrOut, "Generating the demo data (%d invoices, %d new invoices)…\n", demodata.TrainRows, demodata.NewRows)
	if err := demodb.Load(ctx, h.DB(), demodata.DefaultSeed); err != nil {
		return interruptedErr(ctx, err)
	}
	r, closeConn, err := newRunner(ctx, h, opts.IO, sqlrun.FormatTable)
	if err != nil {
		return interruptedErr(ctx, err)
	}
	defer closeConn()
	r.Status = nil // the demo's output is its results and notes only
	return interruptedErr(ctx, r.Script(ctx, opts.Script))
}
