package demodb

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"fmt"

	"github.com/duckdb/duckdb-go/v2"

	"github.com/copse-dev/copse/internal/demodata"
)

// Tables lists the tables Load creates, in creation order.
var Tables = []string{"invoices", "new_invoices", "new_invoice_outcomes", "feature_dictionary"}

const featureColumns = `
	invoice_id      BIGINT PRIMARY KEY,
	invoice_date    DATE,
	amount          DOUBLE,
	terms_days      INTEGER,
	segment         VARCHAR,
	region          VARCHAR,
	channel         VARCHAR,
	tenure_months   INTEGER,
	past_late_share DOUBLE,
	open_invoices   INTEGER,
	credit_use      DOUBLE,
	noise_x         DOUBLE,
	noise_tag       VARCHAR`

var schema = []string{
	`CREATE TABLE invoices (` + featureColumns + `,
	days_late       INTEGER,
	late_30         BOOLEAN)`,
	`CREATE TABLE new_invoices (` + featureColumns + `)`,
	`CREATE TABLE new_invoice_outcomes (
	invoice_id BIGINT PRIMARY KEY,
	days_late  INTEGER,
	late_30    BOOLEAN)`,
	`CREATE TABLE feature_dictionary (
	feature     VARCHAR PRIMARY KEY,
	description VARCHAR,
	owner       VARCHAR)`,
}

// NewFirstID is the first invoice_id of new_invoices; the training invoices count
// from 1.
const NewFirstID = 100001

// Load creates the demo tables in db and fills them from seed (use
// [demodata.DefaultSeed] for the demo's own data). It fails if a table already exists.
func Load(ctx context.Context, db *sql.DB, seed uint64) error {
	conn, err := db.Conn(ctx)
	if err != nil {
		return fmt.Errorf("demo data: %w", err)
	}
	defer conn.Close()
	var existing string
	err = conn.QueryRowContext(ctx, `SELECT coalesce(string_agg(table_name, ', ' ORDER BY table_name), '')
		FROM information_schema.tables WHERE table_schema = 'main' AND table_name IN (?, ?, ?, ?)`,
		Tables[0], Tables[1], Tables[2], Tables[3]).Scan(&existing)
	if err != nil {
		return fmt.Errorf("demo data: %w", err)
	}
	if existing != "" {
		return fmt.Errorf("demo data: the database already has %s: use a new database file", existing)
	}
	for _, stmt := range schema {
		if _, err := conn.ExecContext(ctx, stmt); err != nil {
			return fmt.Errorf("demo data: %w", err)
		}
	}
	train := demodata.Generate(seed, 1, demodata.TrainRows)
	fresh := demodata.Generate(seed, NewFirstID, demodata.NewRows)
	err = conn.Raw(func(dc any) error {
		c, ok := dc.(driver.Conn)
		if !ok {
			return fmt.Errorf("unexpected driver connection %T", dc)
		}
		if err := appendRows(c, "invoices", len(train), func(i int) []driver.Value {
			inv := &train[i]
			return append(features(inv), int32(inv.DaysLate), inv.Late30)
		}); err != nil {
			return err
		}
		if err := appendRows(c, "new_invoices", len(fresh), func(i int) []driver.Value {
			return features(&fresh[i])
		}); err != nil {
			return err
		}
		if err := appendRows(c, "new_invoice_outcomes", len(fresh), func(i int) []driver.Value {
			inv := &fresh[i]
			return []driver.Value{inv.ID, int32(inv.DaysLate), inv.Late30}
		}); err != nil {
			return err
		}
		return appendRows(c, "feature_dictionary", len(demodata.Dictionary), func(i int) []driver.Value {
			f := demodata.Dictionary[i]
			return []driver.Value{f.Name, f.Description, f.Owner}
		})
	})
	if err != nil {
		return fmt.Errorf("demo data: %w", err)
	}
	return nil
}

func appendRows(c driver.Conn, table string, n int, row func(int) []driver.Value) error {
	a, err := duckdb.NewAppenderFromConn(c, "", table)
	if err != nil {
		return fmt.Errorf("%s: %w", table, err)
	}
	for i := range n {
		if err := a.AppendRow(row(i)...); err != nil {
			a.Close()
			return fmt.Errorf("%s row %d: %w", table, i+1, err)
		}
	}
	if err := a.Close(); err != nil {
		return fmt.Errorf("%s: %w", table, err)
	}
	return nil
}

func features(inv *demodata.Invoice) []driver.Value {
	return []driver.Value{
		inv.ID, inv.Date, inv.Amount, int32(inv.TermsDays), inv.Segment, inv.Region,
		inv.Channel, int32(inv.TenureMonths), orNull(inv.PastLateShare), int32(inv.OpenInvoices),
		orNull(inv.CreditUse), inv.NoiseX, inv.NoiseTag,
	}
}

func orNull(p *float64) driver.Value {
	if p == nil {
		return nil
	}
	return *p
}
