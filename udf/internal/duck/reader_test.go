package duck

import (
	"context"
	"errors"
	"math"
	"strconv"
	"strings"
	"testing"
	"time"
)

func TestReadColumnsTypes(t *testing.T) {
	db := openDB(t)
	exec(t, db, "CREATE TYPE mood AS ENUM ('sad', 'ok', 'happy')")
	exec(t, db, `CREATE TABLE r AS SELECT * FROM (VALUES
		(1, 2.5::FLOAT, true, DATE '1970-01-03', TIMESTAMP '1970-01-01 00:00:01.5', 12.34::DECIMAL(9,2), 'b', 'happy'::mood, [1]),
		(NULL, NULL, false, NULL, NULL, -0.01::DECIMAL(9,2), NULL, NULL, NULL),
		(-3, 1e30::FLOAT, NULL, DATE '1969-12-31', TIMESTAMP '1969-12-31 23:59:59', NULL, 'a', 'sad'::mood, []),
		(4, 0, true, DATE '1970-01-01', TIMESTAMP '1970-01-01', 1::DECIMAL(9,2), 'b', 'ok'::mood, [2])
	) v(i, f, bo, dt, ts, dec, s, e, l)`)
	ctx := context.Background()
	_, err := ReadColumns(ctx, db, "SELECT * FROM r", ReadOptions{})
	if !errors.Is(err, ErrColumnType) || !strings.Contains(err.Error(), `"l"`) {
		t.Fatalf("LIST column: got %v", err)
	}
	cols, err := ReadColumns(ctx, db, "SELECT * FROM r", ReadOptions{Skip: func(n string) bool { return n == "l" }})
	if err != nil {
		t.Fatal(err)
	}
	nan := math.NaN()
	want := map[string][]float64{
		"i":   {1, nan, -3, 4},
		"f":   {2.5, nan, float64(float32(1e30)), 0},
		"bo":  {1, 0, nan, 1},
		"dt":  {2, nan, -1, 0},
		"ts":  {1.5, nan, -1, 0},
		"dec": {12.34, -0.01, nan, 1},
	}
	if len(cols) != 8 {
		t.Fatalf("%d columns", len(cols))
	}
	for _, c := range cols[:6] {
		w := want[c.Name]
		if len(c.Values) != 4 || c.Codes != nil {
			t.Fatalf("%s: %v %v", c.Name, c.Values, c.Codes)
		}
		for i := range w {
			if !(c.Values[i] == w[i] || math.IsNaN(w[i]) && math.IsNaN(c.Values[i])) {
				t.Errorf("%s (%v) row %d: got %v want %v", c.Name, c.Type, i, c.Values[i], w[i])
			}
		}
	}
	s, e := cols[6], cols[7]
	if got := [4]int32(s.Codes); got != [4]int32{0, -1, 1, 0} || strings.Join(s.Levels, ",") != "b,a" {
		t.Errorf("VARCHAR: codes %v levels %v", s.Codes, s.Levels)
	}
	if got := [4]int32(e.Codes); got != [4]int32{2, -1, 0, 1} || strings.Join(e.Levels, ",") != "sad,ok,happy" {
		t.Errorf("ENUM: codes %v levels %v", e.Codes, e.Levels)
	}
	if _, err := ReadColumns(ctx, db, "SELECT * FROM no_such_table", ReadOptions{}); err == nil ||
		!strings.Contains(err.Error(), "no_such_table") {
		t.Fatalf("bad query: %v", err)
	}
	if _, err := ReadColumns(ctx, db, "SELECT error('failed late') FROM range(5000) WHERE range = 4000", ReadOptions{}); err == nil {
		t.Fatal("runtime error not reported")
	}
}

func TestReadColumnsCancel(t *testing.T) {
	db := openDB(t)
	ctx, cancel := context.WithTimeout(context.Background(), 200*time.Millisecond)
	defer cancel()
	// Long enough to still be running when the deadline passes.
	_, err := ReadColumns(ctx, db, "SELECT sum(a.range * b.range) AS s FROM range(100000000) a, range(100) b", ReadOptions{})
	if !errors.Is(err, context.DeadlineExceeded) {
		t.Fatalf("got %v", err)
	}
	var one int
	if err := db.QueryRow("SELECT 1").Scan(&one); err != nil {
		t.Fatal(err)
	}
}

// wideTable is 16 DOUBLE and 4 VARCHAR columns with NULLs.
const wideTable = `CREATE TABLE w AS SELECT
	i::DOUBLE AS c0, CASE WHEN i % 10 = 0 THEN NULL ELSE i * 0.5 END AS c1,
	sin(i) AS c2, cos(i) AS c3, i % 7 AS c4, i % 13 AS c5, sqrt(i) AS c6, ln(i + 1) AS c7,
	i * 1.5 AS c8, i * 2.5 AS c9, -i AS c10, i % 1000 AS c11, i / 3 AS c12, i % 17 AS c13, i % 19 AS c14,
	CASE WHEN i % 3 = 0 THEN NULL ELSE i % 23 END AS c15,
	'city_' || (i % 50) AS s0, CASE WHEN i % 7 = 0 THEN NULL ELSE 'a_much_longer_category_' || (i % 300) END AS s1,
	['x', 'y', 'z'][(i % 3) + 1] AS s2, 'id' || (i % 10000) AS s3
FROM range(N_ROWS) r(i)`

func TestReadColumnsWide(t *testing.T) {
	rows := 1_000_000
	if testing.Short() {
		rows = 50_000
	}
	db := openDB(t)
	exec(t, db, strings.Replace(wideTable, "N_ROWS", strconv.Itoa(rows), 1))
	cols, err := ReadColumns(context.Background(), db, "SELECT * FROM w", ReadOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(cols) != 20 {
		t.Fatalf("%d columns", len(cols))
	}
	for i, x := range cols[0].Values { // order preserved
		if x != float64(i) {
			t.Fatalf("c0[%d] = %v", i, x)
		}
	}
	for _, c := range cols {
		var sum float64
		var nulls, distinct int
		if c.Codes != nil {
			for _, k := range c.Codes {
				if k < 0 {
					nulls++
				}
			}
			distinct = len(c.Levels)
		} else {
			for _, x := range c.Values {
				if math.IsNaN(x) {
					nulls++
				} else {
					sum += x
				}
			}
		}
		var wantSum float64
		var wantNulls, wantDistinct int
		q := "SELECT coalesce(sum(" + c.Name + "), 0), count(*) - count(" + c.Name + "), count(DISTINCT " + c.Name + ") FROM w"
		if c.Codes != nil {
			q = "SELECT 0, count(*) - count(" + c.Name + "), count(DISTINCT " + c.Name + ") FROM w"
		}
		if err := db.QueryRow(q).Scan(&wantSum, &wantNulls, &wantDistinct); err != nil {
			t.Fatal(err)
		}
		if nulls != wantNulls || math.Abs(sum-wantSum) > 1e-9*math.Max(1, math.Abs(wantSum)) ||
			c.Codes != nil && distinct != wantDistinct {
			t.Errorf("%s: sum %v nulls %d distinct %d; want %v %d %d", c.Name, sum, nulls, distinct, wantSum, wantNulls, wantDistinct)
		}
	}
}

func BenchmarkReadColumns(b *testing.B) {
	db := openDB(b)
	exec(b, db, strings.Replace(wideTable, "N_ROWS", "1000000", 1))
	b.ResetTimer()
	start := time.Now()
	for b.Loop() {
		if _, err := ReadColumns(context.Background(), db, "SELECT * FROM w", ReadOptions{}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(time.Since(start).Seconds()/float64(b.N), "s/1Mx20")
}
