package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"testing"

	"github.com/copse-dev/copse/forest"
	"github.com/copse-dev/copse/udf"
)

func TestModelParse(t *testing.T) {
	tests := []struct {
		name   string
		args   []string
		code   int
		want   ModelOptions
		stderr string
	}{
		{"save", []string{"model", "save", "--db", "a.duckdb", "--model", "fo@2", "-o", "fo.cpsm"}, exitOK,
			ModelOptions{DB: "a.duckdb", Model: "fo@2", File: "fo.cpsm"}, ""},
		{"load", []string{"model", "load", "--db", "b.duckdb", "--model", "fo", "fo.cpsm"}, exitOK,
			ModelOptions{DB: "b.duckdb", Model: "fo", File: "fo.cpsm"}, ""},
		{"save without output", []string{"model", "save", "--db", "a.duckdb", "--model", "fo"}, exitUsage, ModelOptions{},
			"copse: --output is required\nRun 'copse model save --help' for usage.\n"},
		{"save without db", []string{"model", "save", "--model", "fo", "-o", "x"}, exitUsage, ModelOptions{},
			"copse: --db is required\nRun 'copse model save --help' for usage.\n"},
		{"load without file", []string{"model", "load", "--db", "b.duckdb", "--model", "fo"}, exitUsage, ModelOptions{},
			"copse: accepts 1 arg(s), received 0\nRun 'copse model load --help' for usage.\n"},
		{"load without model", []string{"model", "load", "--db", "b.duckdb", "f.cpsm"}, exitUsage, ModelOptions{},
			"copse: --model is required\nRun 'copse model load --help' for usage.\n"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d, _, errOut := testDeps("")
			var got *ModelOptions
			capture := func(_ context.Context, o *ModelOptions) error { got = o; return nil }
			code := parse(d, newModelCmd(d, capture, capture), tc.args...)
			if code != tc.code {
				t.Fatalf("exit code %d, want %d (stderr %q)", code, tc.code, errOut.String())
			}
			checkOutput(t, "stderr", errOut, tc.stderr)
			if tc.code != exitOK {
				return
			}
			if got == nil || got.DB != tc.want.DB || got.Model != tc.want.Model || got.File != tc.want.File {
				t.Fatalf("options %+v, want %+v", got, tc.want)
			}
		})
	}
}

// modelDB makes a database file holding a forest "fo" and a boosted model "bo".
func modelDB(t *testing.T, path string) {
	t.Helper()
	h, err := udf.Open(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	defer h.Close()
	for _, q := range []string{
		`CREATE TABLE rows AS SELECT i, (i % 7) * 1.5 AS x, ['a', 'b', 'c'][i % 3 + 1] AS c,
			CASE WHEN i % 5 = 0 THEN NULL ELSE i % 4 END AS z, (i % 7) + (i % 3) * 2.0 AS y FROM range(150) t(i)`,
		`SELECT * FROM copse_train('fo', 'rows', target := 'y', trees := 4, exclude := ['i'])`,
		`SELECT * FROM copse_train('bo', 'rows', target := 'y', method := 'boosting', trees := 6, exclude := ['i'])`,
	} {
		if _, err := h.DB().Exec(q); err != nil {
			t.Fatalf("%s: %v", q, err)
		}
	}
}

func modelBytes(t *testing.T, path, ref string) []byte {
	t.Helper()
	h, err := udf.Open(context.Background(), path)
	if err != nil {
		t.Fatal(err)
	}
	defer h.Close()
	b, _, err := h.ModelBinary(context.Background(), ref)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func TestModelSaveLoad(t *testing.T) {
	dir := t.TempDir()
	src, dst := filepath.Join(dir, "a.duckdb"), filepath.Join(dir, "b.duckdb")
	file := filepath.Join(dir, "fo.cpsm")
	modelDB(t, src)
	d, out, errOut := testDeps("")
	if code := runCmd(t, d, "model", "save", "--db", src, "--model", "fo@1", "-o", file); code != exitOK {
		t.Fatalf("save: exit code %d (stderr %q)", code, errOut.String())
	}
	b, err := os.ReadFile(file)
	if err != nil {
		t.Fatal(err)
	}
	checkOutput(t, "save stdout", out, "")
	if !bytes.HasPrefix(b, []byte("CPSM")) {
		t.Fatalf("model file starts with %q, want the magic CPSM", b[:min(4, len(b))])
	}
	if _, err := forest.Decode(b); err != nil {
		t.Fatalf("model file does not decode: %v", err)
	}
	d, _, errOut = testDeps("")
	if code := runCmd(t, d, "model", "load", "--db", dst, "--model", "moved", file); code != exitOK {
		t.Fatalf("load: exit code %d (stderr %q)", code, errOut.String())
	}
	checkOutput(t, "load stderr", errOut, "loaded "+file+" as moved@1 (forest regression of y)\n")
	if got := modelBytes(t, dst, "moved@1"); !bytes.Equal(got, b) {
		t.Errorf("the loaded model encodes to %d bytes differing from the file's %d", len(got), len(b))
	}

	// A PMML document loads too; a boosted model carries everything through it, so the
	// loaded model encodes to the original's bytes.
	h, err := udf.Open(context.Background(), src)
	if err != nil {
		t.Fatal(err)
	}
	var doc string
	if err := h.DB().QueryRow("SELECT text FROM copse_pmml('bo')").Scan(&doc); err != nil {
		t.Fatal(err)
	}
	h.Close()
	pmml := filepath.Join(dir, "bo.pmml")
	if err := os.WriteFile(pmml, []byte(doc), 0o644); err != nil {
		t.Fatal(err)
	}
	d, _, errOut = testDeps("")
	if code := runCmd(t, d, "model", "load", "--db", dst, "--model", "bo", pmml); code != exitOK {
		t.Fatalf("load pmml: exit code %d (stderr %q)", code, errOut.String())
	}
	if got, want := modelBytes(t, dst, "bo"), modelBytes(t, src, "bo"); !bytes.Equal(got, want) {
		t.Errorf("the model loaded from PMML encodes to %d bytes, differing from the original's %d", len(got), len(want))
	}
}

func TestModelErrors(t *testing.T) {
	dir := t.TempDir()
	src := filepath.Join(dir, "a.duckdb")
	modelDB(t, src)
	file := filepath.Join(dir, "fo.cpsm")
	d, _, errOut := testDeps("")
	if code := runCmd(t, d, "model", "save", "--db", src, "--model", "fo", "-o", file); code != exitOK {
		t.Fatalf("save: %d %q", code, errOut.String())
	}
	good, _ := os.ReadFile(file)
	bad := bytes.Clone(good)
	bad[len(bad)/2] ^= 1
	corrupt := filepath.Join(dir, "bad.cpsm")
	if err := os.WriteFile(corrupt, bad, 0o644); err != nil {
		t.Fatal(err)
	}
	cls := filepath.Join(dir, "cls.pmml")
	os.WriteFile(cls, []byte(`<?xml version="1.0"?><PMML xmlns="http://www.dmg.org/PMML-4_4" version="4.4"><Header><Application name="other"/></Header></PMML>`), 0o644)
	fresh := filepath.Join(dir, "fresh.duckdb")
	tests := []struct {
		name string
		args []string
		want string
	}{
		{"unknown model", []string{"model", "save", "--db", src, "--model", "nothing", "-o", filepath.Join(dir, "x.cpsm")}, `model not found: "nothing"`},
		{"corrupt file", []string{"model", "load", "--db", fresh, "--model", "m", corrupt}, "checksum"},
		{"missing file", []string{"model", "load", "--db", fresh, "--model", "m", filepath.Join(dir, "none.cpsm")}, "no such file"},
		{"foreign pmml", []string{"model", "load", "--db", fresh, "--model", "m", cls}, `written by "other"`},
		{"bad name", []string{"model", "load", "--db", src, "--model", "m@2", file}, "'@'"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			before := modelBytes(t, src, "fo")
			d, _, errOut := testDeps("")
			if code := runCmd(t, d, tc.args...); code != exitError {
				t.Fatalf("exit code %d, want %d (stderr %q)", code, exitError, errOut.String())
			}
			if !bytes.Contains(errOut.Bytes(), []byte(tc.want)) {
				t.Errorf("stderr %q does not name %q", errOut.String(), tc.want)
			}
			if _, err := os.Stat(fresh); err == nil {
				t.Errorf("a failed load created %s", fresh)
			}
			if _, err := os.Stat(filepath.Join(dir, "x.cpsm")); err == nil {
				t.Error("a failed save wrote its file")
			}
			if after := modelBytes(t, src, "fo"); !bytes.Equal(after, before) {
				t.Error("the source model changed")
			}
		})
	}
}
