package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
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
	if got.PictureDir != defaultPictureDir || len(got.Pictures) != len(demoPictures) {
		t.Errorf("options: pictures %q (%d of them), want %q (%d)", got.PictureDir, len(got.Pictures), defaultPictureDir, len(demoPictures))
	}
	for args, want := range map[string]string{"--pictures=pics": "pics", "--pictures=": ""} {
		got = nil
		if code := parse(d, newDemoCmd(d, func(_ context.Context, o *DemoOptions) error { got = o; return nil }), "demo", args); code != exitOK || got == nil {
			t.Fatalf("%s: exit code %d", args, code)
		}
		if got.PictureDir != want {
			t.Errorf("%s: picture folder %q, want %q", args, got.PictureDir, want)
		}
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

// TestDemoPictures draws the demo's pictures of small stand-ins of its models and
// checks that each exists, is a picture, and is listed after the script's output.
func TestDemoPictures(t *testing.T) {
	d, out, errOut := testDeps("")
	dir := filepath.Join(t.TempDir(), "pictures") // created by the demo
	opts := &DemoOptions{IO: d.IO, OpenHost: d.OpenHost, Interrupts: noInterrupts,
		Script: smallDemoScript, PictureDir: dir, Pictures: demoPictures}
	if err := runDemo(context.Background(), opts); err != nil {
		t.Fatalf("%v (stderr %q)", err, errOut.String())
	}
	_, block, ok := strings.Cut(out.String(), "\nPictures of the models (see 'copse plot --help'), written to "+dir+":\n")
	if !ok {
		t.Fatalf("no list of pictures in the output:\n%s", out.String())
	}
	listed := strings.Fields(block)
	if len(listed) != len(demoPictures) {
		t.Fatalf("listed %d pictures %q, want %d", len(listed), listed, len(demoPictures))
	}
	for i, path := range listed {
		if filepath.Dir(path) != dir {
			t.Errorf("picture %s is not in %s", path, dir)
		}
		if f := demoPictures[i].File; !demoPictures[i].TopFeature && filepath.Base(path) != f {
			t.Errorf("picture %d is %s, want %s", i+1, filepath.Base(path), f)
		}
		checkPicture(t, path)
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) != len(demoPictures) {
		t.Errorf("%s holds %d files, want %d", dir, len(entries), len(demoPictures))
	}
}

// TestDemoPictureModels checks that every model the demo draws is one the demo script
// trains, so that the pictures follow the script.
func TestDemoPictureModels(t *testing.T) {
	for _, p := range demoPictures {
		for _, m := range p.Spec.Models {
			if !strings.Contains(scripts.Demo, "copse_train('"+m+"'") && !strings.Contains(scripts.Demo, "copse_blend('"+m+"'") {
				t.Errorf("picture %s draws model %q, which sql/demo.sql does not train", p.File, m)
			}
		}
	}
}
