package main

import (
	"context"
	"testing"

	scripts "github.com/copse-dev/copse/sql"
)

func TestDemoParse(t *testing.T) {
	d, out, errOut := testDeps("")
	var got *DemoOptions
	code := parse(d, newDemoCmd(d, func(_ context.Context, o *DemoOptions) error { got = o; return nil }), "demo", "--db", "demo.duckdb")
	if code != exitOK || got == nil {
		t.Fatalf("exit code %d (stderr %q)", code, errOut.String())
	}
	if got.DB != "demo.duckdb" || got.Script != scripts.Demo {
		t.Errorf("options: db %q, script of %d bytes; want demo.duckdb and the embedded demo.sql", got.DB, len(got.Script))
	}
	checkOutput(t, "stdout", out, "")
	d, _, errOut = testDeps("")
	if code := parse(d, newDemoCmd(d, nil), "demo", "--trees", "3"); code != exitUsage {
		t.Errorf("exit code %d, want %d", code, exitUsage)
	}
	checkOutput(t, "stderr", errOut, "copse: unknown flag: --trees\nRun 'copse demo --help' for usage.\n")
}

// TestDemoRun runs the demo command's wiring with a small stand-in script; the real
// script's output is checked by the golden test in package sql.
func TestDemoRun(t *testing.T) {
	d, out, errOut := testDeps("")
	opts := &DemoOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: noInterrupts,
		Script: "--: Tables\nSELECT (SELECT count(*) FROM invoices) AS invoices, (SELECT count(*) FROM new_invoices) AS new_invoices, " +
			"(SELECT count(*) FROM feature_dictionary) AS features;\nCREATE TABLE quiet (i INTEGER);\n"}
	if err := runDemo(context.Background(), opts); err != nil {
		t.Fatal(err)
	}
	checkOutput(t, "stdout", out, "Tables\ninvoices  new_invoices  features\n--------  ------------  --------\n   20000          5000        12\n1 row\n\n")
	checkOutput(t, "stderr", errOut, "Generating the demo data (20000 invoices, 5000 new invoices)…\n")
}
