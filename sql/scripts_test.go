package scripts_test

import (
	"bytes"
	"context"
	"database/sql"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"github.com/copse-dev/copse/internal/demodata"
	"github.com/copse-dev/copse/internal/demodb"
	"github.com/copse-dev/copse/internal/sqlrun"
	scripts "github.com/copse-dev/copse/sql"
	"github.com/copse-dev/copse/udf"
)

var update = flag.Bool("update", false, "rewrite the expected outputs (NAME.expected) from the scripts' current output")

// TestScripts runs every script of this folder on a fresh in-memory database holding
// the demo tables and compares what it prints with NAME.expected. Each script runs in
// an empty temporary directory, so files it writes land there.
func TestScripts(t *testing.T) {
	all := scripts.All()
	if len(all) < 2 {
		t.Fatalf("found %d scripts; want demo.sql and at least one recipe", len(all))
	}
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range all {
		t.Run(s.Name, func(t *testing.T) {
			expectedFile := filepath.Join(dir, s.Name+".expected")
			t.Chdir(t.TempDir())
			got := runScript(t, s.Text, s.Name == "demo")
			if *update {
				if err := os.WriteFile(expectedFile, got, 0o644); err != nil {
					t.Fatal(err)
				}
				return
			}
			want, err := os.ReadFile(expectedFile)
			if err != nil {
				t.Fatalf("%v (run 'go test ./sql -update' to create it)", err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("%s.sql: output differs from %s.expected (run 'go test ./sql -update' after a deliberate change)\n%s",
					s.Name, s.Name, firstDifference(want, got))
			}
		})
	}
}

// runScript runs script on a fresh database with the demo tables and returns its
// output; with checkDrivers it then checks what the demo's forest learned.
func runScript(t *testing.T, script string, checkDrivers bool) []byte {
	t.Helper()
	ctx := context.Background()
	h, err := udf.Open(ctx, "")
	if err != nil {
		t.Fatal(err)
	}
	defer h.Close()
	if err := demodb.Load(ctx, h.DB(), demodata.DefaultSeed); err != nil {
		t.Fatal(err)
	}
	conn, err := h.DB().Conn(ctx)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	var out bytes.Buffer
	r := &sqlrun.Runner{Conn: conn, Out: &out, Format: sqlrun.FormatTable, Attach: h.Attach}
	if err := r.Script(ctx, script); err != nil {
		t.Fatalf("%v\noutput so far:\n%s", err, out.String())
	}
	if checkDrivers {
		checkTrueDrivers(t, conn)
	}
	return out.Bytes()
}

// checkTrueDrivers holds the demo's forest to the ground truth of package demodata.
// By impurity decrease, its three most important features are strong drivers and the
// features that play no part rank below every strong driver; by permutation, the
// same holds for the idle features.
func checkTrueDrivers(t *testing.T, conn *sql.Conn) {
	t.Helper()
	for _, method := range []string{"impurity", "permutation"} {
		ranked := importanceRanking(t, conn, method)
		if len(ranked) != len(demodata.Dictionary) {
			t.Fatalf("%s importance lists %d features %v, want %d", method, len(ranked), ranked, len(demodata.Dictionary))
		}
		rank := map[string]int{}
		for i, f := range ranked {
			rank[f] = i
		}
		strong := map[string]bool{}
		lastStrong := 0
		for _, f := range demodata.StrongDrivers {
			strong[f] = true
			lastStrong = max(lastStrong, rank[f])
		}
		if method == "impurity" {
			for _, f := range ranked[:3] {
				if !strong[f] {
					t.Errorf("impurity: top features %v: %s is not a strong driver %v", ranked[:3], f, demodata.StrongDrivers)
				}
			}
		}
		for _, f := range demodata.NoiseFeatures {
			if rank[f] < lastStrong {
				t.Errorf("%s: idle feature %s ranks %d, above a strong driver (ranking %v)", method, f, rank[f]+1, ranked)
			}
		}
	}
}

// importanceRanking lists the demo forest's features, most important first.
func importanceRanking(t *testing.T, conn *sql.Conn, method string) []string {
	t.Helper()
	rows, err := conn.QueryContext(context.Background(),
		"SELECT feature FROM copse_importance('late_risk', method := ?) ORDER BY importance DESC, feature", method)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var ranked []string
	for rows.Next() {
		var f string
		if err := rows.Scan(&f); err != nil {
			t.Fatal(err)
		}
		ranked = append(ranked, f)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return ranked
}

// firstDifference shows the first line where got departs from want.
func firstDifference(want, got []byte) string {
	w := bytes.Split(want, []byte("\n"))
	g := bytes.Split(got, []byte("\n"))
	for i := 0; i < len(w) || i < len(g); i++ {
		var wl, gl []byte
		if i < len(w) {
			wl = w[i]
		}
		if i < len(g) {
			gl = g[i]
		}
		if !bytes.Equal(wl, gl) {
			return fmt.Sprintf("line %d:\nwant: %s\n got: %s", i+1, wl, gl)
		}
	}
	return "(same lines, different bytes)"
}
