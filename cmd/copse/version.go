package main

import (
	"context"
	"fmt"
	"runtime"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/udf"
)

// VersionOptions are the inputs of `copse version`.
type VersionOptions struct {
	IO       *IOStreams
	OpenHost func(ctx context.Context, path string) (*udf.Host, error)
	Version  string
}

func newVersionCmd(d *Deps, runF func(context.Context, *VersionOptions) error) *cobra.Command {
	opts := &VersionOptions{IO: d.IO, OpenHost: d.OpenHost, Version: d.Version}
	return &cobra.Command{
		Use:   "version",
		Short: "Show the versions of copse, Go and DuckDB",
		Args:  argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runVersion(cmd.Context(), opts)
		},
	}
}

func runVersion(ctx context.Context, opts *VersionOptions) error {
	h, err := opts.OpenHost(ctx, "")
	if err != nil {
		return err
	}
	defer h.Close()
	var duck string
	if err := h.DB().QueryRowContext(ctx, "SELECT version()").Scan(&duck); err != nil {
		return err
	}
	_, err = fmt.Fprintf(opts.IO.Out, "copse   %s\ngo      %s\nduckdb  %s\n", opts.Version, runtime.Version(), duck)
	return err
}
