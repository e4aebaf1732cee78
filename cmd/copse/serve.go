package main

import (
	"context"
	"crypto/tls"
	"fmt"
	"log/slog"
	"net"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/internal/pgserve"
	"github.com/copse-dev/copse/udf"
)

// ServeOptions are the inputs of `copse serve`.
type ServeOptions struct {
	IO       *IOStreams
	OpenHost func(ctx context.Context, path string) (*udf.Host, error)
	// Stops delivers the signals that drain the server (SIGINT, SIGTERM).
	Stops func() (<-chan os.Signal, func())
	// Listening, when set, is told the bound address (tests listen on port 0).
	Listening func(addr net.Addr)

	DB               string // database file; "" for a fresh in-memory database
	Listen           string // host:port
	PasswordFile     string
	TLSCert, TLSKey  string
	ReadOnly         bool
	MaxConnections   int
	StatementTimeout time.Duration
}

func newServeCmd(d *Deps, runF func(context.Context, *ServeOptions) error) *cobra.Command {
	opts := &ServeOptions{IO: d.IO, OpenHost: d.OpenHost, Stops: stopSignals}
	cmd := &cobra.Command{
		Use:   "serve [--db FILE] [--listen HOST:PORT] [--password-file F] [--tls-cert F --tls-key F]",
		Short: "Serve the database to PostgreSQL clients: psql, drivers, notebooks, BI tools",
		Long: `Serve the database over the PostgreSQL wire protocol (version 3), so that psql, a
Postgres driver in a notebook, or a BI tool runs SQL — every copse function included —
on it. Each client gets its own session; sessions run in parallel. Statements are
DuckDB SQL; lists, maps and structs arrive as JSON text.

The server listens on loopback only unless a password file is given: lines of
NAME:PASSWORD, readable by its owner only. Passwords are checked with SCRAM-SHA-256,
so they never cross the network. With --tls-cert and --tls-key, clients may also
encrypt the whole session.

A client's cancel request (Ctrl-C in psql) stops its running statement; a stopped
training leaves the model catalog as it was. SIGINT or SIGTERM drains the server:
running statements get 30 seconds to finish, then are cancelled, and the database is
closed cleanly.`,
		Example: `  copse serve --db sales.duckdb
  psql "host=127.0.0.1 port=5433 user=me dbname=sales" -c "SELECT * FROM copse_models()"
  copse serve --db sales.duckdb --listen 0.0.0.0:5433 --password-file users.txt \
      --tls-cert server.crt --tls-key server.key --read-only`,
		Args: argsUsage(cobra.NoArgs),
		RunE: func(cmd *cobra.Command, args []string) error {
			if (opts.TLSCert == "") != (opts.TLSKey == "") {
				return usageErrorf(cmd, "give --tls-cert and --tls-key together")
			}
			if opts.ReadOnly && opts.DB == "" {
				return usageErrorf(cmd, "--read-only needs --db FILE: a fresh in-memory database has nothing to read")
			}
			if opts.MaxConnections < 0 {
				return usageErrorf(cmd, "--max-connections must be 0 (no limit) or more, not %d", opts.MaxConnections)
			}
			if opts.StatementTimeout < 0 {
				return usageErrorf(cmd, "--statement-timeout must be 0 (none) or more, not %v", opts.StatementTimeout)
			}
			if _, _, err := net.SplitHostPort(opts.Listen); err != nil {
				return usageErrorf(cmd, "--listen %q: want HOST:PORT", opts.Listen)
			}
			if runF != nil {
				return runF(cmd.Context(), opts)
			}
			return runServe(cmd.Context(), opts)
		},
	}
	f := cmd.Flags()
	f.StringVar(&opts.DB, "db", "", "DuckDB database `FILE` (created if missing; default: in memory)")
	f.StringVar(&opts.Listen, "listen", "127.0.0.1:5433", "listen on `HOST:PORT`; beyond loopback only with --password-file")
	f.StringVar(&opts.PasswordFile, "password-file", "", "require passwords: `FILE` of NAME:PASSWORD lines, mode 600")
	f.StringVar(&opts.TLSCert, "tls-cert", "", "offer TLS with this PEM certificate `FILE`")
	f.StringVar(&opts.TLSKey, "tls-key", "", "PEM private key `FILE` of --tls-cert")
	f.BoolVar(&opts.ReadOnly, "read-only", false, "open the database read-only: scoring and reading, no training or writes")
	f.IntVar(&opts.MaxConnections, "max-connections", 64, "refuse clients beyond `N` sessions (0: no limit)")
	f.DurationVar(&opts.StatementTimeout, "statement-timeout", 0, "cancel statements running longer than `D`, e.g. 10m (0: none)")
	return cmd
}

func stopSignals() (<-chan os.Signal, func()) {
	ch := make(chan os.Signal, 1)
	signal.Notify(ch, os.Interrupt, syscall.SIGTERM)
	return ch, func() { signal.Stop(ch) }
}

func runServe(ctx context.Context, opts *ServeOptions) error {
	cfg := pgserve.Config{
		MaxConnections:   opts.MaxConnections,
		StatementTimeout: opts.StatementTimeout,
		Logger:           slog.New(slog.NewTextHandler(opts.IO.ErrOut, &slog.HandlerOptions{Level: slog.LevelWarn})),
	}
	if opts.PasswordFile != "" {
		pw, err := pgserve.ReadPasswordFile(opts.PasswordFile)
		if err != nil {
			return err
		}
		if cfg.Users, err = pgserve.NewUsers(pw); err != nil {
			return err
		}
	}
	if opts.TLSCert != "" {
		cert, err := tls.LoadX509KeyPair(opts.TLSCert, opts.TLSKey)
		if err != nil {
			return fmt.Errorf("tls: %w", err)
		}
		cfg.TLS = &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	}
	ln, err := net.Listen("tcp", opts.Listen)
	if err != nil {
		return err
	}
	if err := pgserve.CheckListenAddr(ln.Addr(), cfg.Users != nil); err != nil {
		ln.Close()
		return fmt.Errorf("refusing to listen on %v without --password-file: anyone who reaches it could read and change the database", ln.Addr())
	}
	path := opts.DB
	if opts.ReadOnly {
		path += "?access_mode=read_only"
	}
	h, err := opts.OpenHost(ctx, path)
	if err != nil {
		ln.Close()
		return err
	}
	defer h.Close()

	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	sigs, stopSigs := opts.Stops()
	defer stopSigs()
	go func() {
		select {
		case sig := <-sigs:
			fmt.Fprintf(opts.IO.ErrOut, "copse serve: %v: draining\n", sig)
			cancel()
		case <-ctx.Done():
		}
	}()
	db := opts.DB
	if db == "" {
		db = "an in-memory database"
	}
	fmt.Fprintf(opts.IO.ErrOut, "copse serve: %s on %v\n", db, ln.Addr())
	if opts.Listening != nil {
		opts.Listening(ln.Addr())
	}
	if err := pgserve.New(h, cfg).Serve(ctx, ln); err != nil {
		return err
	}
	if err := h.Close(); err != nil {
		return fmt.Errorf("close %s: %w", db, err)
	}
	fmt.Fprintln(opts.IO.ErrOut, "copse serve: stopped")
	return nil
}
