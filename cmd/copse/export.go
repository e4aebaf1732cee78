package main

import (
	"context"
	"fmt"
	"os"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/udf"
)

// ExportOptions are the inputs of `copse export`.
type ExportOptions struct {
	IO       *IOStreams
	OpenHost func(ctx context.Context, path string) (*udf.Host, error)

	DB     string // database file holding the model
	Model  string // 'name' or 'name@3'
	File   string // the file written ("-": standard output)
	Export udf.ExportOptions
}

func newExportCmd(d *Deps, runF func(context.Context, *ExportOptions) error) *cobra.Command {
	opts := &ExportOptions{IO: d.IO, OpenHost: d.OpenHost}
	cmd := &cobra.Command{
		Use:   "export --db FILE --model MODEL [--format sql|pmml] -o FILE",
		Short: "Write a stored model as SQL or PMML",
		Long: `Write a stored model as text that scores rows without copse: a SELECT over an input
relation that returns what copse_score returns (format sql, in the standard, duckdb or
postgres dialect), or a PMML 4.4 document (format pmml). The same as
SELECT text FROM copse_export(...).`,
		Example: `  copse export --db sales.duckdb --model late --dialect postgres --relation invoices --key invoice_id -o late.sql`,
		Args:    argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := requireFlags(cmd, "db", "model", "output"); err != nil {
				return err
			}
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runExport(cmd.Context(), opts)
		},
	}
	f := cmd.Flags()
	f.StringVar(&opts.DB, "db", "", "DuckDB database `FILE` holding the model")
	f.StringVar(&opts.Model, "model", "", "the `MODEL`: 'name' (latest version) or 'name@version'")
	f.StringVarP(&opts.File, "output", "o", "", "write the text to `FILE` ('-': standard output)")
	f.StringVar(&opts.Export.Format, "format", "sql", "`FORMAT`: sql or pmml")
	f.StringVar(&opts.Export.Dialect, "dialect", "", "SQL `DIALECT`: standard (default), duckdb or postgres")
	f.StringVar(&opts.Export.Relation, "relation", "", "the input table or view `NAME` the SQL reads (default input_rows)")
	f.StringVar(&opts.Export.Key, "key", "", "an input `COLUMN` carried to the output beside the score")
	f.StringVar(&opts.Export.Class, "class", "", "classification: the `CLASS` whose probability is the score")
	return cmd
}

func runExport(ctx context.Context, opts *ExportOptions) error {
	if _, err := os.Stat(opts.DB); err != nil {
		return fmt.Errorf("export: database %s: %w", opts.DB, err)
	}
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	text, e, err := h.Export(ctx, opts.Model, opts.Export)
	if err != nil {
		return fmt.Errorf("export: %w", err)
	}
	if opts.File == "-" {
		_, err = fmt.Fprint(opts.IO.Out, text)
	} else {
		err = os.WriteFile(opts.File, []byte(text), 0o644)
	}
	if err != nil {
		return fmt.Errorf("export %s@%d: %w", e.Name, e.Version, err)
	}
	fmt.Fprintf(opts.IO.ErrOut, "exported %s@%d as %s (%d bytes) to %s\n", e.Name, e.Version, formatName(opts.Export.Format), len(text), opts.File)
	return nil
}

// formatName is the format as the summary line shows it.
func formatName(f string) string {
	if f == "" {
		return "sql"
	}
	return f
}
