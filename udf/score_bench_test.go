package udf

import (
	"fmt"
	"os"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/copse-dev/copse/forest"
)

// benchRows is the scoring benchmark's table size: 1M rows, or COPSE_BENCH_ROWS (the
// issue's figure is 10M).
func benchRows(b *testing.B) int {
	n := 1_000_000
	if s := os.Getenv("COPSE_BENCH_ROWS"); s != "" {
		v, err := strconv.Atoi(s)
		if err != nil || v < 1 {
			b.Fatalf("COPSE_BENCH_ROWS=%q: want a positive row count", s)
		}
		n = v
	}
	return n
}

// benchTable creates name with n rows of 16 DOUBLE (d0…d15, some NULL) and 4 VARCHAR
// (s0…s3, 12 levels each) columns, plus a target y when withTarget.
func benchTable(b *testing.B, h *Host, name string, n, seed int, withTarget bool) {
	var cols []string
	for j := range 16 {
		c := fmt.Sprintf("(hash(i * %d + %d) %% 100000) / 100000.0", 2*j+3, seed)
		if j%5 == 4 {
			c = fmt.Sprintf("CASE WHEN i %% 23 = %d THEN NULL ELSE %s END", j, c)
		}
		cols = append(cols, c+fmt.Sprintf("::DOUBLE AS d%d", j))
	}
	for j := range 4 {
		cols = append(cols, fmt.Sprintf("'level_' || (hash(i * %d + %d) %% 12)::VARCHAR AS s%d", 41+j, seed, j))
	}
	q := "CREATE OR REPLACE TABLE " + name + " AS SELECT " + strings.Join(cols, ", ") + " FROM range(" + strconv.Itoa(n) + ") r(i)"
	if withTarget {
		q = "CREATE OR REPLACE TABLE " + name + " AS SELECT *, d0 * 4 + coalesce(d4, 0.5) * 2 + d7 * d8 + (s0 IN ('level_1', 'level_5'))::INTEGER * 3 + d10 AS y FROM (" +
			strings.TrimPrefix(q, "CREATE OR REPLACE TABLE "+name+" AS ") + ")"
	}
	mustExec(b, h.db, q)
}

// BenchmarkScore compares SELECT sum(copse_score('m', t)) FROM t (2 DuckDB threads) with
// the engine's own batch prediction (2 goroutines) on the same rows, for a 100-tree
// forest and a single depth-6 tree, and native SQL arithmetic over the same columns.
// The rows/s metrics are comparable across the sub-benchmarks.
func BenchmarkScore(b *testing.B) {
	n := benchRows(b)
	h := openHost(b)
	mustExec(b, h.db, "SET threads = 2")
	benchTable(b, h, "bench_train", 20000, 1, true)
	benchTable(b, h, "t", n, 2, false)

	forestParams := forest.DefaultParams(forest.MethodForest)
	forestParams.Threads = 2
	treeParams := forest.DefaultParams(forest.MethodTree)
	treeParams.MaxDepth = 6
	for _, c := range []struct {
		name string
		p    forest.Params
	}{{"forest100", forestParams}, {"tree_depth6", treeParams}} {
		m := trainOn(b, h, c.name, "SELECT * FROM bench_train", "y", c.p)
		b.Run(c.name+"/sql", func(b *testing.B) {
			q := "SELECT sum(copse_score('" + c.name + "', t)) FROM t"
			// Decode the model into the host's cache first: that happens once per process.
			queryFloats(b, h.db, "SELECT copse_score('"+c.name+"', t) FROM t LIMIT 1")
			start := time.Now()
			for b.Loop() {
				if got := queryFloats(b, h.db, q); len(got) != 1 {
					b.Fatal(got)
				}
			}
			b.ReportMetric(float64(n)*float64(b.N)/time.Since(start).Seconds(), "rows/s")
		})
		b.Run(c.name+"/engine", func(b *testing.B) {
			cols := engineCols(b, h.db, m, "SELECT * FROM t")
			out := make([]float64, n*m.Width())
			b.ResetTimer()
			start := time.Now()
			for b.Loop() {
				if err := m.Predict(cols, out, 2); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(n)*float64(b.N)/time.Since(start).Seconds(), "rows/s")
		})
	}
	b.Run("native_sql", func(b *testing.B) {
		var terms []string
		for j := range 16 {
			terms = append(terms, fmt.Sprintf("coalesce(d%d, 0)", j))
		}
		for j := range 4 {
			terms = append(terms, fmt.Sprintf("length(s%d)", j))
		}
		q := "SELECT sum(" + strings.Join(terms, " + ") + ") FROM t"
		start := time.Now()
		for b.Loop() {
			queryFloats(b, h.db, q)
		}
		b.ReportMetric(float64(n)*float64(b.N)/time.Since(start).Seconds(), "rows/s")
	})
}
