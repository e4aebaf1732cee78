package duck

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"github.com/duckdb/duckdb-go/v2/mapping"
)

// weightedSum declares name(model VARCHAR, row ANY) → DOUBLE, the sum over
// the struct's fields k of (k+1)·value, NULL counting as 0 and a VARCHAR
// counting as its byte length. Models "bad", "fail" and "panic" exercise the
// error paths; every other name is accepted.
func weightedSum(name string) ScalarFunc {
	return ScalarFunc{
		Name:   name,
		Args:   []Type{Varchar, Any},
		Result: Double,
		Bind: func(call ScalarCall) (ScalarExec, error) {
			if len(call.Args) != 2 {
				return nil, fmt.Errorf("%s: expected 2 arguments, got %d", name, len(call.Args))
			}
			model, _ := call.Args[0].Value.(string)
			if model == "bad" {
				return nil, fmt.Errorf("%s: model %q not found", name, model)
			}
			row := call.Args[1].Type
			if row.ID != mapping.TypeStruct {
				return nil, fmt.Errorf("%s: row must be a STRUCT, got %v", name, row)
			}
			for _, f := range row.Fields {
				if !f.Type.Numeric() && f.Type.ID != mapping.TypeVarchar {
					return nil, fmt.Errorf("%s: field %q has unsupported type %v", name, f.Name, f.Type)
				}
			}
			return func(in *ScalarInput, out *ScalarOutput) error {
				m := model
				if m == "" { // not constant at bind: read it from the first row
					m, _ = in.Arg(0).String(0)
				}
				switch m {
				case "fail":
					return fmt.Errorf("%s: scoring failed (custom exec error)", name)
				case "panic":
					panic("boom in exec")
				}
				res := out.Float64s()
				clear(res)
				scratch := make([]float64, in.Len()) // per call: executors run concurrently
				for k, f := range row.Fields {
					v := in.Field(1, k)
					w := float64(k + 1)
					if f.Type.ID == mapping.TypeVarchar {
						for i := range res {
							if s, ok := v.String(i); ok {
								res[i] += w * float64(len(s))
							}
						}
						continue
					}
					if err := v.Float64s(scratch); err != nil {
						return err
					}
					for i, x := range scratch {
						if !math.IsNaN(x) {
							res[i] += w * x
						}
					}
				}
				return nil
			}, nil
		},
	}
}

// scalarTable creates t with every readable type, NULLs in most columns,
// short and long strings, and DECIMALs of all four storage widths.
const scalarTable = `CREATE TABLE t AS SELECT
	CASE WHEN i % 7 = 0 THEN NULL ELSE i * 0.5 END::DOUBLE AS d,
	CASE WHEN i % 11 = 0 THEN NULL ELSE i * 0.25 END::FLOAT AS f,
	(i * 3 - 100000)::BIGINT AS b,
	CASE WHEN i % 5 = 0 THEN NULL ELSE i - 50000 END::INTEGER AS i4,
	(i % 30000 - 15000)::SMALLINT AS s,
	(i % 200 - 100)::TINYINT AS ti,
	(i * 7)::UBIGINT AS ub,
	(i * 2)::UINTEGER AS ui,
	CASE WHEN i % 13 = 0 THEN NULL ELSE i % 2 = 0 END AS bo,
	CASE WHEN i % 17 = 0 THEN NULL ELSE repeat('x', (i % 20)::INTEGER) END AS v,
	DATE '1960-01-01' + (i % 30000)::INTEGER AS dt,
	CASE WHEN i % 19 = 0 THEN NULL ELSE TIMESTAMP '2020-01-01' + to_microseconds(i * 1234567) END AS ts,
	(i / 100.0 - 300)::DECIMAL(4,1) AS dec_s,
	CASE WHEN i % 23 = 0 THEN NULL ELSE (i * 1.37)::DECIMAL(9,2) END AS dec_i,
	(i * 12345.6789 - 1e6)::DECIMAL(18,4) AS dec_l,
	(i::HUGEINT * 1000000000000 - 7 + 0.12345)::DECIMAL(30,5) AS dec_h
FROM range(N_ROWS) r(i)`

// scalarRef is the same weighted sum in plain SQL over t's columns.
const scalarRef = `1 * coalesce(d, 0) + 2 * coalesce(f::DOUBLE, 0) + 3 * b::DOUBLE + 4 * coalesce(i4::DOUBLE, 0)
	+ 5 * s::DOUBLE + 6 * ti::DOUBLE + 7 * ub::DOUBLE + 8 * ui::DOUBLE + 9 * coalesce(bo::INTEGER::DOUBLE, 0)
	+ 10 * coalesce(strlen(v)::DOUBLE, 0) + 11 * (dt - DATE '1970-01-01')::DOUBLE
	+ 12 * coalesce(epoch_us(ts) / 1e6, 0) + 13 * dec_s::DOUBLE + 14 * coalesce(dec_i::DOUBLE, 0)
	+ 15 * dec_l::DOUBLE + 16 * dec_h::DOUBLE`

func TestScalarMatchesSQL(t *testing.T) {
	db := openDB(t)
	if err := RegisterScalar(conn(t, db), weightedSum("s_wsum")); err != nil {
		t.Fatal(err)
	}
	exec(t, db, "SET threads = 2")
	exec(t, db, strings.Replace(scalarTable, "N_ROWS", "100000", 1))
	for _, q := range []string{
		// The table alias t is the whole row as a struct.
		"SELECT s_wsum('m', t), " + scalarRef + " FROM t",
		"SELECT s_wsum('m' || '', struct_pack(d, f, b, i4, s, ti, ub, ui, bo, v, dt, ts, dec_s, dec_i, dec_l, dec_h)), " + scalarRef + " FROM t",
		// Model name not constant at bind: the executor reads it.
		"SELECT s_wsum(n.name, {'d': d, 'f': f, 'b': b, 'i4': i4, 's': s, 'ti': ti, 'ub': ub, 'ui': ui, 'bo': bo, 'v': v, 'dt': dt, 'ts': ts, 'dec_s': dec_s, 'dec_i': dec_i, 'dec_l': dec_l, 'dec_h': dec_h}), " + scalarRef + " FROM t, (SELECT 'm' AS name) n",
	} {
		rows, err := db.Query(q)
		if err != nil {
			t.Fatalf("%s: %v", q, err)
		}
		n := 0
		for rows.Next() {
			var got, want float64
			if err := rows.Scan(&got, &want); err != nil {
				t.Fatal(err)
			}
			if math.Abs(got-want) > 1e-12*math.Max(1, math.Abs(want)) {
				t.Fatalf("%s\nrow %d: got %v want %v", q, n, got, want)
			}
			n++
		}
		if err := rows.Err(); err != nil {
			t.Fatal(err)
		}
		rows.Close()
		if n != 100_000 {
			t.Fatalf("%d rows", n)
		}
	}
}

func TestScalarBindAndErrors(t *testing.T) {
	db := openDB(t)
	if err := RegisterScalar(conn(t, db), weightedSum("s_err")); err != nil {
		t.Fatal(err)
	}
	exec(t, db, "CREATE TABLE u AS SELECT i::DOUBLE AS a, 'x' || i AS b FROM range(5000) r(i)")
	wantErr(t, db, "SELECT s_err('bad', u) FROM u", `s_err: model "bad" not found`)
	wantErr(t, db, "SELECT s_err('m', 1.0) FROM u", "s_err: row must be a STRUCT, got DECIMAL(2,1)")
	wantErr(t, db, "SELECT s_err('m', {'l': [1, 2]})", `field "l" has unsupported type INTEGER[]`)
	wantErr(t, db, "SELECT sum(s_err('fail', u)) FROM u", "s_err: scoring failed (custom exec error)")
	wantErr(t, db, "SELECT sum(s_err('panic', u)) FROM u", "internal error: boom in exec")
	// A $1 model name is not foldable; the executor reads it from row 0.
	var got float64
	if err := db.QueryRow("SELECT sum(s_err(?, u)) FROM u", "m").Scan(&got); err != nil {
		t.Fatal(err)
	}
	var want float64
	if err := db.QueryRow("SELECT sum(a + 2 * strlen(b)) FROM u").Scan(&want); err != nil {
		t.Fatal(err)
	}
	if got != want {
		t.Fatalf("got %v want %v", got, want)
	}
	// A NULL field reaches the executor (special NULL handling) instead of
	// making the result NULL.
	if err := db.QueryRow("SELECT s_err('m', {'a': NULL::DOUBLE, 'b': 'xyz'})").Scan(&got); err != nil || got != 6 {
		t.Fatalf("NULL field: %v, %v", got, err)
	}
}

// BenchmarkScalar10M scores 10M rows × 20 columns (16 DOUBLE, 4 VARCHAR)
// passed as the table alias struct, at threads=2, against the same
// arithmetic in native SQL.
func BenchmarkScalar10M(b *testing.B) {
	const rows = 10_000_000
	db := openDB(b)
	if err := RegisterScalar(conn(b, db), weightedSum("s_bench")); err != nil {
		b.Fatal(err)
	}
	exec(b, db, "SET threads = 2")
	exec(b, db, strings.Replace(wideTable, "N_ROWS", "10000000", 1))
	native := "SELECT sum("
	for k := range 20 {
		col := fmt.Sprintf("c%d", k)
		if k >= 16 {
			col = fmt.Sprintf("strlen(s%d)", k-16)
		}
		native += fmt.Sprintf("%d * coalesce(%s, 0) + ", k+1, col)
	}
	native = strings.TrimSuffix(native, " + ") + ") FROM w"
	for _, q := range []struct{ name, sql string }{
		{"raw_udf", "SELECT sum(s_bench('m', w)) FROM w"},
		{"native_sql", native},
	} {
		b.Run(q.name, func(b *testing.B) {
			for b.Loop() {
				var s float64
				if err := db.QueryRow(q.sql).Scan(&s); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(rows)*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mrows/s")
		})
	}
}
