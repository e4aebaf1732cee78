package duck

import (
	"context"
	"database/sql"
	"os"
	"path/filepath"
	"runtime/debug"
	"strings"
	"testing"

	"github.com/duckdb/duckdb-go/v2"
	"github.com/duckdb/duckdb-go/v2/mapping"
)

// The driver version this package's unsafe read and C-API use were checked
// against; upgrading means re-running these tests and updating the pins.
const (
	pinnedDriver = "v2.10506.0"
	pinnedDuckDB = "v1.5.6"
)

// openDB opens a private in-memory database with room for nested work.
func openDB(t testing.TB) *sql.DB {
	t.Helper()
	db, err := sql.Open("duckdb", "")
	if err != nil {
		t.Fatal(err)
	}
	db.SetMaxOpenConns(4)
	t.Cleanup(func() { db.Close() })
	return db
}

func conn(t testing.TB, db *sql.DB) *sql.Conn {
	t.Helper()
	c, err := db.Conn(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

func exec(t testing.TB, db *sql.DB, q string) {
	t.Helper()
	if _, err := db.Exec(q); err != nil {
		t.Fatalf("%s: %v", q, err)
	}
}

func TestDriverVersionPinned(t *testing.T) {
	if got := driverVersion(t); got != pinnedDriver {
		t.Fatalf("duckdb-go is %q, this package is checked against %s: re-check the layout and C-API callbacks, then update the pin", got, pinnedDriver)
	}
	if v := mapping.LibraryVersion(); v != pinnedDuckDB {
		t.Fatalf("DuckDB library is %s, want %s", v, pinnedDuckDB)
	}
	if err := CheckLayout(); err != nil {
		t.Fatal(err)
	}
}

// driverVersion reads the linked duckdb-go version from the build info, or
// from go.mod when the test binary carries no dependency list.
func driverVersion(t *testing.T) string {
	const path = "github.com/duckdb/duckdb-go/v2"
	if bi, ok := debug.ReadBuildInfo(); ok {
		for _, d := range bi.Deps {
			if d.Path == path {
				return d.Version
			}
		}
	}
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for ; ; dir = filepath.Dir(dir) {
		b, err := os.ReadFile(filepath.Join(dir, "go.mod"))
		if err == nil {
			for line := range strings.Lines(string(b)) {
				if f := strings.Fields(line); len(f) >= 2 && f[0] == path {
					return f[1]
				}
			}
			return ""
		}
		if filepath.Dir(dir) == dir {
			t.Fatal("go.mod not found")
		}
	}
}

func TestWithConnMemoryAndFile(t *testing.T) {
	file := filepath.Join(t.TempDir(), "x.db")
	for _, dsn := range []string{"", file} {
		db, err := sql.Open("duckdb", dsn)
		if err != nil {
			t.Fatal(err)
		}
		c := conn(t, db)
		want, err := duckdb.ConnId(c)
		if err != nil {
			t.Fatal(err)
		}
		err = WithConn(c, func(raw mapping.Connection) error {
			var cc mapping.ClientContext
			mapping.ConnectionGetClientContext(raw, &cc)
			defer mapping.DestroyClientContext(&cc)
			if got := uint64(mapping.ClientContextGetConnectionId(cc)); got != want {
				t.Errorf("dsn %q: id %d, want %d", dsn, got, want)
			}
			return nil
		})
		if err != nil {
			t.Fatalf("dsn %q: %v", dsn, err)
		}
		// A function registered through the raw handle is visible to the pool.
		err = RegisterScalar(c, ScalarFunc{Name: "t_one", Result: Double, Bind: func(ScalarCall) (ScalarExec, error) {
			return func(in *ScalarInput, out *ScalarOutput) error {
				for i := range out.Float64s() {
					out.Float64s()[i] = 1
				}
				return nil
			}, nil
		}})
		if err != nil {
			t.Fatal(err)
		}
		var one float64
		if err := db.QueryRow("SELECT t_one()").Scan(&one); err != nil || one != 1 {
			t.Fatalf("dsn %q: t_one() = %v, %v", dsn, one, err)
		}
		c.Close()
		db.Close()
	}
	if _, err := os.Stat(file); err != nil {
		t.Fatal(err)
	}
}

// errorText runs q and returns its error text, failing if it succeeds.
func errorText(t *testing.T, db *sql.DB, q string) string {
	t.Helper()
	rows, err := db.Query(q)
	if err == nil {
		for rows.Next() {
		}
		err = rows.Err()
		rows.Close()
	}
	if err == nil {
		t.Fatalf("%s: no error", q)
	}
	return err.Error()
}

func wantErr(t *testing.T, db *sql.DB, q string, parts ...string) {
	t.Helper()
	msg := errorText(t, db, q)
	t.Logf("%s\n\t→ %s", q, msg)
	for _, p := range parts {
		if !strings.Contains(msg, p) {
			t.Errorf("%s:\nerror %q\nlacks %q", q, msg, p)
		}
	}
}
