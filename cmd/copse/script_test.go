package main

import (
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"golang.org/x/tools/txtar"
)

// TestScripts runs the command-line cases in testdata/script/*.txtar. Each archive
// holds the files
//
//	args    one argument per line (after "copse")
//	stdin   standard input (optional)
//	stdout  expected standard output
//	stderr  expected standard error
//	exit    expected exit code (optional; default 0)
func TestScripts(t *testing.T) {
	files, err := filepath.Glob(filepath.Join("testdata", "script", "*.txtar"))
	if err != nil {
		t.Fatal(err)
	}
	if len(files) == 0 {
		t.Fatal("no scripts in testdata/script")
	}
	for _, file := range files {
		t.Run(strings.TrimSuffix(filepath.Base(file), ".txtar"), func(t *testing.T) {
			b, err := os.ReadFile(file)
			if err != nil {
				t.Fatal(err)
			}
			parts := map[string]string{}
			for _, f := range txtar.Parse(b).Files {
				parts[f.Name] = string(f.Data)
			}
			args, ok := parts["args"]
			if !ok {
				t.Fatal("no args file")
			}
			code := 0
			if e, ok := parts["exit"]; ok {
				if code, err = strconv.Atoi(strings.TrimSpace(e)); err != nil {
					t.Fatalf("exit: %v", err)
				}
			}
			d, out, errOut := testDeps(parts["stdin"])
			got := runCmd(t, d, strings.Split(strings.TrimRight(args, "\n"), "\n")...)
			if got != code {
				t.Errorf("exit code %d, want %d (stderr %q)", got, code, errOut.String())
			}
			checkOutput(t, "stdout", out, parts["stdout"])
			checkOutput(t, "stderr", errOut, parts["stderr"])
		})
	}
}
