package duck

import (
	"database/sql"
	"fmt"
	"slices"
	"strings"
	"sync/atomic"
	"testing"
	"time"
)

// tableCounts counts callback calls of one registered test function.
type tableCounts struct{ bind, init, fill atomic.Int64 }

// registerEcho registers name(q VARCHAR, <optional named args>) returning
// one row per requested row (rows := n, default 1) that describes the call.
func registerEcho(t *testing.T, db *sql.DB, name string) *tableCounts {
	t.Helper()
	n := &tableCounts{}
	f := TableFunc{
		Name: name,
		Args: []Type{Varchar},
		Named: []Param{
			{"label", Varchar}, {"rows", BigInt}, {"rate", Double}, {"flag", Boolean}, {"drop", VarcharList},
		},
		Bind: func(call TableCall) (*TableBinding, error) {
			n.bind.Add(1)
			mode, _ := call.Named["label"].(string)
			switch mode {
			case "fail-bind":
				return nil, fmt.Errorf("%s: invalid label %q (custom bind error)", name, mode)
			case "panic-bind":
				panic("boom in bind")
			}
			rows := int64(1)
			if r, ok := call.Named["rows"].(int64); ok {
				rows = r
			}
			desc := describe(call)
			return &TableBinding{
				Columns: []Column{{"call", Varchar}, {"i", BigInt}, {"x", Double}, {"ok", Boolean},
					{"ts", Timestamp}, {"names", VarcharList}, {"probs", DoubleList}, {"by_class", VarcharDoubleMap}},
				Init: func() (FillFunc, error) {
					n.init.Add(1)
					next := int64(0)
					return func(out *Chunk) (int, error) {
						n.fill.Add(1)
						switch mode {
						case "fail-fill":
							return 0, fmt.Errorf("%s: out of trees (custom fill error)", name)
						case "panic-fill":
							panic("boom in fill")
						}
						k := 0
						for ; k < out.Capacity() && next < rows; k, next = k+1, next+1 {
							out.SetString(0, k, desc)
							out.SetInt64(1, k, next)
							if next%2 == 1 {
								out.SetNull(2, k)
							} else {
								out.SetFloat64(2, k, float64(next)/2)
							}
							out.SetBool(3, k, next%3 == 0)
							out.SetTime(4, k, time.Date(2024, 1, 2, 3, 4, 5, 0, time.UTC).Add(time.Duration(next)*time.Second))
							out.SetStrings(5, k, []string{"a", fmt.Sprint(next)})
							out.SetFloat64s(6, k, []float64{0.25, 0.75})
							out.SetMap(7, k, []string{"no", "yes"}, []float64{0.1, float64(next)})
						}
						return k, nil
					}, nil
				},
			}, nil
		},
	}
	if err := RegisterTable(conn(t, db), f); err != nil {
		t.Fatal(err)
	}
	return n
}

// describe renders the call's arguments deterministically.
func describe(call TableCall) string {
	keys := make([]string, 0, len(call.Named))
	for k := range call.Named {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	var b strings.Builder
	fmt.Fprintf(&b, "%#v", call.Args)
	for _, k := range keys {
		fmt.Fprintf(&b, " %s=%#v", k, call.Named[k])
	}
	return b.String()
}

func TestTableArgs(t *testing.T) {
	db := openDB(t)
	registerEcho(t, db, "t_echo")
	for _, tc := range []struct{ q, want string }{
		{"SELECT call FROM t_echo('q')", `[]interface {}{"q"}`},
		{"SELECT call FROM t_echo('q', rows := 1)", `[]interface {}{"q"} rows=1`},
		{"SELECT call FROM t_echo('q', drop := ['a', 'b'], flag := true, rate := 0.5, label := 'm')",
			`[]interface {}{"q"} drop=[]string{"a", "b"} flag=true label="m" rate=0.5`},
		{"SELECT call FROM t_echo(NULL, label := NULL, drop := [])", `[]interface {}{interface {}(nil)} drop=[]string{} label=<nil>`},
		{"SELECT call FROM t_echo('q', rate := 2)", `[]interface {}{"q"} rate=2`}, // integer cast to DOUBLE
	} {
		var got string
		if err := db.QueryRow(tc.q).Scan(&got); err != nil {
			t.Errorf("%s: %v", tc.q, err)
			continue
		}
		if got != tc.want {
			t.Errorf("%s:\n got %s\nwant %s", tc.q, got, tc.want)
		}
	}
	// CALL works too.
	var got string
	if err := db.QueryRow("CALL t_echo('c')").Scan(&got, new(any), new(any), new(any), new(any), new(any), new(any), new(any)); err != nil {
		t.Fatal(err)
	}
	wantErr(t, db, "SELECT * FROM t_echo('q', nme := 'x')", `Invalid named parameter "nme"`)
	wantErr(t, db, "SELECT * FROM t_echo('q', drop := ['a', NULL])", "drop: list element 2 is NULL")
}

func TestTableOutput(t *testing.T) {
	db := openDB(t)
	registerEcho(t, db, "t_out")
	var count, sumI int64
	var sumX float64
	var nulls int64
	q := "SELECT count(*), sum(i), sum(x), count(*) - count(x) FROM t_out('q', rows := 5000)"
	if err := db.QueryRow(q).Scan(&count, &sumI, &sumX, &nulls); err != nil {
		t.Fatal(err)
	}
	if count != 5000 || sumI != 5000*4999/2 || nulls != 2500 || sumX != 2500*2499/2*1.0 {
		t.Fatalf("got count %d sum(i) %d sum(x) %v nulls %d", count, sumI, sumX, nulls)
	}
	var row string
	q = `SELECT format('{} {} {} {} {} {}', ok, ts, names, probs, by_class, by_class['yes'])
		FROM t_out('q', rows := 3) WHERE i = 1`
	if err := db.QueryRow(q).Scan(&row); err != nil {
		t.Fatal(err)
	}
	if want := "false 2024-01-02 03:04:06 [a, 1] [0.25, 0.75] {no=0.1, yes=1.0} 1.0"; row != want {
		t.Fatalf("got  %s\nwant %s", row, want)
	}
}

func TestTableErrors(t *testing.T) {
	db := openDB(t)
	registerEcho(t, db, "t_err")
	wantErr(t, db, "SELECT * FROM t_err('q', label := 'fail-bind')",
		"Binder Error", `t_err: invalid label "fail-bind" (custom bind error)`)
	wantErr(t, db, "SELECT * FROM t_err('q', label := 'fail-fill')", "t_err: out of trees (custom fill error)")
	wantErr(t, db, "SELECT * FROM t_err('q', label := 'panic-bind')", "internal error: boom in bind")
	wantErr(t, db, "SELECT * FROM t_err('q', label := 'panic-fill')", "internal error: boom in fill")
	wantErr(t, db, "SELECT * FROM t_err(['not', 'text'])", "t_err")
	var n int
	if err := db.QueryRow("SELECT count(*) FROM t_err('q')").Scan(&n); err != nil || n != 1 {
		t.Fatalf("after errors: %d, %v", n, err)
	}
}

func TestTableExplainDoesNotFill(t *testing.T) {
	db := openDB(t)
	n := registerEcho(t, db, "t_plan")
	for _, q := range []string{"EXPLAIN SELECT * FROM t_plan('q')", "DESCRIBE SELECT * FROM t_plan('q')"} {
		rows, err := db.Query(q)
		if err != nil {
			t.Fatal(err)
		}
		for rows.Next() {
		}
		rows.Close()
	}
	if n.bind.Load() == 0 || n.init.Load() != 0 || n.fill.Load() != 0 {
		t.Fatalf("bind %d init %d fill %d; want bind > 0, no init or fill", n.bind.Load(), n.init.Load(), n.fill.Load())
	}
	// A prepared statement binds once and starts one execution per run.
	st, err := db.Prepare("SELECT count(*) FROM t_plan('q', rows := 3)")
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	for range 3 {
		var c int
		if err := st.QueryRow().Scan(&c); err != nil || c != 3 {
			t.Fatalf("prepared run: %d, %v", c, err)
		}
	}
	if got := n.init.Load(); got != 3 {
		t.Fatalf("init ran %d times for 3 executions", got)
	}
}
