package main

import (
	"bytes"
	"context"
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf"
)

// ModelOptions are the inputs of `copse model save` and `copse model load`.
type ModelOptions struct {
	IO       *IOStreams
	OpenHost func(ctx context.Context, path string) (*udf.Host, error)

	DB    string // database file; required: an in-memory database holds no models
	Model string // save: the model reference ('name' or 'name@3'); load: the new version's name
	File  string // save: the file written ("-": standard output); load: the file read ("-": standard input)
}

func newModelCmd(d *Deps, saveF, loadF func(context.Context, *ModelOptions) error) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "model",
		Short: "Move models between databases as files",
		Long: `Write a stored model to a file, or store a model file as a new version.

A model file holds the model in copse's own binary form (magic "CPSM", format version,
checksum): everything scoring, explaining and reporting need, so the model scores the
same in the database it is loaded into. 'model load' also reads a PMML document written
by copse_pmml.`,
		Args: argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error { return cmd.Help() },
	}
	cmd.AddCommand(newModelSaveCmd(d, saveF), newModelLoadCmd(d, loadF))
	return cmd
}

func newModelSaveCmd(d *Deps, runF func(context.Context, *ModelOptions) error) *cobra.Command {
	opts := &ModelOptions{IO: d.IO, OpenHost: d.OpenHost}
	cmd := &cobra.Command{
		Use:     "save --db FILE --model MODEL -o FILE.cpsm",
		Short:   "Write a stored model to a file",
		Example: `  copse model save --db sales.duckdb --model late@3 -o late.cpsm`,
		Args:    argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := requireFlags(cmd, "db", "model", "output"); err != nil {
				return err
			}
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runModelSave(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVar(&opts.DB, "db", "", "DuckDB database `FILE` holding the model")
	cmd.Flags().StringVar(&opts.Model, "model", "", "the `MODEL`: 'name' (latest version) or 'name@version'")
	cmd.Flags().StringVarP(&opts.File, "output", "o", "", "write the model to `FILE` ('-': standard output)")
	return cmd
}

func newModelLoadCmd(d *Deps, runF func(context.Context, *ModelOptions) error) *cobra.Command {
	opts := &ModelOptions{IO: d.IO, OpenHost: d.OpenHost}
	cmd := &cobra.Command{
		Use:     "load --db FILE --model NAME FILE.cpsm",
		Short:   "Store a model file as a new version of a model",
		Example: `  copse model load --db branch.duckdb --model late late.cpsm`,
		Args:    argsUsage(cobra.ExactArgs(1)),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := requireFlags(cmd, "db", "model"); err != nil {
				return err
			}
			opts.File = args[0]
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runModelLoad(cmd.Context(), opts)
		},
	}
	cmd.Flags().StringVar(&opts.DB, "db", "", "DuckDB database `FILE` to store the model in (created if missing)")
	cmd.Flags().StringVar(&opts.Model, "model", "", "the `NAME` the model is stored under, as its next version")
	return cmd
}

// requireFlags is a usage error naming the first of the flags that was not given.
func requireFlags(cmd *cobra.Command, names ...string) error {
	for _, n := range names {
		if f := cmd.Flags().Lookup(n); f != nil && f.Value.String() == "" {
			return usageErrorf(cmd, "--%s is required", n)
		}
	}
	return nil
}

func runModelSave(ctx context.Context, opts *ModelOptions) error {
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	b, e, err := h.ModelBinary(ctx, opts.Model)
	if err != nil {
		return fmt.Errorf("model save: %w", err)
	}
	if opts.File == "-" {
		_, err = opts.IO.Out.Write(b)
	} else {
		err = os.WriteFile(opts.File, b, 0o644)
	}
	if err != nil {
		return fmt.Errorf("model save %s@%d: %w", e.Name, e.Version, err)
	}
	fmt.Fprintf(opts.IO.ErrOut, "saved %s@%d (%s %s of %s, %d bytes) to %s\n", e.Name, e.Version, e.Method, e.Task, e.Target, len(b), opts.File)
	return nil
}

// pmmlStart is how a PMML document (an XML file) may begin, after any byte-order mark
// and white space.
var pmmlStart = []byte("<")

func runModelLoad(ctx context.Context, opts *ModelOptions) error {
	var b []byte
	var err error
	if opts.File == "-" {
		b, err = io.ReadAll(opts.IO.In)
	} else {
		b, err = os.ReadFile(opts.File)
	}
	if err != nil {
		return fmt.Errorf("model load: %w", err)
	}
	var m *forest.Model
	kind := "model file"
	if bytes.HasPrefix(bytes.TrimSpace(bytes.TrimPrefix(b, []byte("\xef\xbb\xbf"))), pmmlStart) {
		kind = "PMML"
		m, err = forest.ImportPMML(b)
	} else {
		m, err = forest.Decode(b)
	}
	if err != nil {
		return fmt.Errorf("model load %s: %w", opts.File, err)
	}
	h, err := opts.OpenHost(ctx, opts.DB)
	if err != nil {
		return err
	}
	defer h.Close()
	e, err := h.ImportModel(ctx, opts.Model, m, fmt.Sprintf("loaded from %s %s", kind, opts.File))
	if err != nil {
		return fmt.Errorf("model load %s: %w", opts.File, err)
	}
	fmt.Fprintf(opts.IO.ErrOut, "loaded %s as %s@%d (%s %s of %s)\n", opts.File, e.Name, e.Version, e.Method, e.Task, e.Target)
	return nil
}
