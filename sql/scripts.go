// Package scripts holds copse's SQL scripts: the demo that `copse demo` runs and
// recipes for everyday jobs. Every script here is run end to end by this package's
// tests against a database holding the demo tables (see internal/demodb), and its
// output is compared with the checked-in NAME.expected beside it; run
//
//	go test ./sql -update
//
// to rewrite the expected outputs after a deliberate change.
package scripts

import (
	"embed"
	"io/fs"
	"path"
	"sort"
	"strings"
)

// Demo is sql/demo.sql, the script `copse demo` runs.
//
//go:embed demo.sql
var Demo string

//go:embed *.sql
var files embed.FS

// Script is one script of this folder.
type Script struct {
	Name string // file name without .sql
	Text string
}

// All returns every script of this folder in name order.
func All() []Script {
	entries, err := fs.Glob(files, "*.sql")
	if err != nil {
		panic(err) // the pattern is a constant
	}
	sort.Strings(entries)
	out := make([]Script, 0, len(entries))
	for _, e := range entries {
		b, err := files.ReadFile(e)
		if err != nil {
			panic(err) // embedded files are always readable
		}
		out = append(out, Script{Name: strings.TrimSuffix(path.Base(e), ".sql"), Text: string(b)})
	}
	return out
}
