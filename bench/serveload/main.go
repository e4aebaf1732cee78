// Command serveload puts load on `copse serve`: N clients send small scoring queries
// (one row scored per query, through the extended protocol with a parameter) for a
// while, and it prints queries per second, p50 and p99 latency, errors, and the server's
// resident memory at the start and the end.
//
// By default it starts a server in this process on an in-memory database, with a small
// model trained on generated rows; the memory figures are then this process's (server
// and clients). With -addr it loads a running server (whose database must hold the
// table and model made by -setup), and -pid names the server process to read memory
// from.
//
//	go run ./bench/serveload -clients 20 -duration 60s
package main

import (
	"context"
	"flag"
	"fmt"
	"math/rand/v2"
	"net"
	"os"
	"runtime/pprof"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"

	"github.com/copse-dev/copse/internal/pgserve"
	"github.com/copse-dev/copse/udf"
)

// setupSQL makes the table and the model the clients score.
const setupSQL = `CREATE TABLE load_points AS
SELECT i AS id, (i * 7919 %% 1000) / 1000.0 AS x1, (i * 104729 %% 997) / 997.0 AS x2,
       ((i * 7919 %% 1000) / 1000.0 + (i * 104729 %% 997) / 997.0 > 1.0) AS y
FROM range(%d) t(i);
SELECT * FROM copse_train('load_model', 'SELECT x1, x2, y FROM load_points', target := 'y', trees := %d, seed := 1);`

const query = "SELECT copse_score('load_model', p) FROM load_points p WHERE id = $1"

func main() {
	clients := flag.Int("clients", 20, "concurrent clients")
	duration := flag.Duration("duration", 60*time.Second, "how long to send queries")
	rows := flag.Int("rows", 10000, "rows in the generated table")
	trees := flag.Int("trees", 50, "trees in the model")
	addr := flag.String("addr", "", "load a running server at HOST:PORT instead of one in this process")
	pid := flag.Int("pid", 0, "with -addr: the server's process ID, for its memory")
	setup := flag.Bool("setup", false, "with -addr: create the table and model on the server first")
	memProfile := flag.String("memprofile", "", "write a heap profile of this process here at the end")
	flag.Parse()
	if err := run(*clients, *duration, *rows, *trees, *addr, *pid, *setup, *memProfile); err != nil {
		fmt.Fprintln(os.Stderr, "serveload:", err)
		os.Exit(1)
	}
}

func run(clients int, duration time.Duration, nrows, trees int, addr string, pid int, setup bool, memProfile string) error {
	ctx := context.Background()
	if addr == "" {
		h, err := udf.Open(ctx, "")
		if err != nil {
			return err
		}
		defer h.Close()
		ln, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			return err
		}
		sctx, stop := context.WithCancel(ctx)
		done := make(chan error, 1)
		go func() { done <- pgserve.New(h, pgserve.Config{}).Serve(sctx, ln) }()
		defer func() { stop(); <-done }()
		addr, pid, setup = ln.Addr().String(), os.Getpid(), true
	}
	host, port, err := net.SplitHostPort(addr)
	if err != nil {
		return err
	}
	dsn := fmt.Sprintf("host=%s port=%s user=load dbname=copse sslmode=disable", host, port)
	if setup {
		c, err := pgx.Connect(ctx, dsn)
		if err != nil {
			return err
		}
		_, err = c.Exec(ctx, fmt.Sprintf(setupSQL, nrows, trees))
		c.Close(ctx)
		if err != nil {
			return fmt.Errorf("setup: %w", err)
		}
	}

	memStart := rssKiB(pid)
	lat := make([][]time.Duration, clients)
	errs := make([]int, clients)
	var firstErr error
	var errOnce sync.Once
	deadline := time.Now().Add(duration)
	var wg sync.WaitGroup
	start := time.Now()
	for i := range clients {
		wg.Go(func() {
			c, err := pgx.Connect(ctx, dsn)
			if err != nil {
				errs[i]++
				errOnce.Do(func() { firstErr = err })
				return
			}
			defer c.Close(ctx)
			r := rand.New(rand.NewPCG(uint64(i), 1))
			for time.Now().Before(deadline) {
				id := r.Int64N(int64(nrows))
				t0 := time.Now()
				var score float64
				err := c.QueryRow(ctx, query, id).Scan(&score)
				lat[i] = append(lat[i], time.Since(t0))
				if err != nil {
					errs[i]++
					errOnce.Do(func() { firstErr = err })
				}
			}
		})
	}
	wg.Wait()
	elapsed := time.Since(start)
	memEnd := rssKiB(pid)

	var all []time.Duration
	nerr := 0
	for i := range lat {
		all = append(all, lat[i]...)
		nerr += errs[i]
	}
	sort.Slice(all, func(a, b int) bool { return all[a] < all[b] })
	if memProfile != "" {
		f, err := os.Create(memProfile)
		if err == nil {
			err = pprof.WriteHeapProfile(f)
			f.Close()
		}
		if err != nil {
			fmt.Fprintln(os.Stderr, "serveload: memprofile:", err)
		}
	}
	fmt.Printf("clients %d, %v: %d queries, %.0f qps, p50 %v, p99 %v, errors %d, server RSS %s → %s\n",
		clients, elapsed.Round(time.Millisecond), len(all), float64(len(all))/elapsed.Seconds(),
		quantile(all, 0.50), quantile(all, 0.99), nerr, fmtKiB(memStart), fmtKiB(memEnd))
	if firstErr != nil {
		return fmt.Errorf("first error: %w", firstErr)
	}
	return nil
}

// quantile is the q-quantile of sorted latencies (nearest rank).
func quantile(sorted []time.Duration, q float64) time.Duration {
	if len(sorted) == 0 {
		return 0
	}
	i := int(q*float64(len(sorted))+0.5) - 1
	return sorted[max(0, min(i, len(sorted)-1))].Round(time.Microsecond)
}

// rssKiB reads a process's resident memory from /proc (Linux); -1 when unknown.
func rssKiB(pid int) int {
	if pid <= 0 {
		return -1
	}
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", pid))
	if err != nil {
		return -1
	}
	for _, line := range strings.Split(string(b), "\n") {
		if rest, ok := strings.CutPrefix(line, "VmRSS:"); ok {
			f := strings.Fields(rest)
			if len(f) > 0 {
				if n, err := strconv.Atoi(f[0]); err == nil {
					return n
				}
			}
		}
	}
	return -1
}

func fmtKiB(k int) string {
	if k < 0 {
		return "unknown"
	}
	return fmt.Sprintf("%.1f MiB", float64(k)/1024)
}
