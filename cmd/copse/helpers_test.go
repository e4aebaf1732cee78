package main

import (
	"bytes"
	"os"
	"strings"
	"testing"

	"github.com/spf13/cobra"

	"github.com/copse-dev/copse/udf"
)

// testDeps returns deps whose streams are buffers, whose database is in memory and
// whose Ctrl-C never comes.
func testDeps(stdin string) (*Deps, *bytes.Buffer, *bytes.Buffer) {
	var out, errOut bytes.Buffer
	d := &Deps{
		IO:         &IOStreams{In: strings.NewReader(stdin), Out: &out, ErrOut: &errOut},
		OpenHost:   udf.Open,
		Interrupts: noInterrupts,
		Version:    "v0.0.0-test",
	}
	return d, &out, &errOut
}

func noInterrupts() (<-chan os.Signal, func()) { return make(chan os.Signal), func() {} }

// pressedInterrupts delivers one Ctrl-C at once, on every subscription.
func pressedInterrupts() (<-chan os.Signal, func()) {
	ch := make(chan os.Signal, 1)
	ch <- os.Interrupt
	return ch, func() {}
}

// runCmd runs the command line args through the full command tree.
func runCmd(t *testing.T, d *Deps, args ...string) int {
	t.Helper()
	return execute(d, newRootCmd(d), args)
}

// parse runs args through a root holding only sub, whose runF captured the options.
func parse(d *Deps, sub *cobra.Command, args ...string) int {
	return execute(d, newRoot(sub), args)
}

func checkOutput(t *testing.T, name string, got *bytes.Buffer, want string) {
	t.Helper()
	if got.String() != want {
		t.Errorf("%s:\n got %q\nwant %q", name, got.String(), want)
	}
}
