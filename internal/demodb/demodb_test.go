package demodb

import (
	"context"
	"database/sql"
	"testing"

	_ "github.com/duckdb/duckdb-go/v2"

	"github.com/copse-dev/copse/internal/demodata"
)

func TestLoad(t *testing.T) {
	ctx := context.Background()
	db, err := sql.Open("duckdb", "")
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	db.SetMaxOpenConns(1) // one in-memory database, one connection
	if err := Load(ctx, db, demodata.DefaultSeed); err != nil {
		t.Fatal(err)
	}
	want := demodata.Generate(demodata.DefaultSeed, 1, demodata.TrainRows)
	var late, nullPast int
	var days int64
	for i := range want {
		if want[i].Late30 {
			late++
		}
		if want[i].PastLateShare == nil {
			nullPast++
		}
		days += int64(want[i].DaysLate)
	}
	var gotRows, gotLate, gotNull int
	var gotDays int64
	var first string
	err = db.QueryRowContext(ctx, `SELECT count(*), count(*) FILTER (late_30), count(*) FILTER (past_late_share IS NULL),
		sum(days_late), strftime(min(invoice_date), '%Y-%m-%d') FROM invoices`).Scan(&gotRows, &gotLate, &gotNull, &gotDays, &first)
	if err != nil {
		t.Fatal(err)
	}
	if gotRows != len(want) || gotLate != late || gotNull != nullPast || gotDays != days || first != "2025-01-01" {
		t.Errorf("invoices: rows %d late %d null %d days %d first %s; want %d %d %d %d 2025-01-01",
			gotRows, gotLate, gotNull, gotDays, first, len(want), late, nullPast, days)
	}
	for table, n := range map[string]int{"new_invoices": demodata.NewRows, "new_invoice_outcomes": demodata.NewRows, "feature_dictionary": len(demodata.Dictionary)} {
		var got int
		if err := db.QueryRowContext(ctx, "SELECT count(*) FROM "+table).Scan(&got); err != nil {
			t.Fatal(err)
		}
		if got != n {
			t.Errorf("%s: %d rows, want %d", table, got, n)
		}
	}
	err = Load(ctx, db, demodata.DefaultSeed)
	if want := "demo data: the database already has feature_dictionary, invoices, new_invoice_outcomes, new_invoices: use a new database file"; err == nil || err.Error() != want {
		t.Errorf("loading twice: error %v, want %q", err, want)
	}
}
