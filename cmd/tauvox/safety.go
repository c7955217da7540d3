package main

import (
	"fmt"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/mapset"
)

// checkOutput refuses an output that is, lies inside or contains an
// input (output.Check).
func checkOutput(out string, inputs ...string) error { return output.Check(out, inputs...) }

// newStage starts an output folder (mapset.NewStage) and prints, as notes,
// what it did to the leftovers of an earlier run of the same output that
// was killed (an interrupted replacement rolled back or finished).
func newStage(e *env, out string, force bool) (*mapset.Stage, error) {
	st, err := mapset.NewStage(out, force)
	if err != nil {
		return nil, err
	}
	printNotes(e, st.Notes())
	return st, nil
}

// printNotes prints notes on stderr, one line each.
func printNotes(e *env, notes []string) {
	for _, n := range notes {
		fmt.Fprintln(e.stderr, "tauvox: note: "+oneLine(n))
	}
}
