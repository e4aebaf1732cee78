package main

import (
	"context"
	"runtime"
	"testing"
)

func TestVersionParse(t *testing.T) {
	d, _, errOut := testDeps("")
	var got *VersionOptions
	code := parse(d, newVersionCmd(d, func(_ context.Context, o *VersionOptions) error { got = o; return nil }), "version")
	if code != exitOK || got == nil || got.Version != "v0.0.0-test" {
		t.Fatalf("exit code %d, options %+v (stderr %q)", code, got, errOut.String())
	}
	d, _, errOut = testDeps("")
	if code := parse(d, newVersionCmd(d, nil), "version", "x"); code != exitUsage {
		t.Errorf("exit code %d, want %d", code, exitUsage)
	}
	checkOutput(t, "stderr", errOut, "copse: unknown command \"x\" for \"copse version\"\nRun 'copse version --help' for usage.\n")
}

func TestVersionRun(t *testing.T) {
	d, out, errOut := testDeps("")
	if code := runCmd(t, d, "version"); code != exitOK {
		t.Fatalf("exit code %d (stderr %q)", code, errOut.String())
	}
	// The DuckDB version is the one linked through duckdb-go v2.10506.0 (go.mod).
	checkOutput(t, "stdout", out, "copse   v0.0.0-test\ngo      "+runtime.Version()+"\nduckdb  v1.5.6\n")
	checkOutput(t, "stderr", errOut, "")
}

func TestRootUsage(t *testing.T) {
	d, out, errOut := testDeps("")
	if code := runCmd(t, d, "nosuch"); code != exitUsage {
		t.Errorf("exit code %d, want %d", code, exitUsage)
	}
	checkOutput(t, "stdout", out, "")
	checkOutput(t, "stderr", errOut, "copse: unknown command \"nosuch\"\nRun 'copse --help' for usage.\n")
}
