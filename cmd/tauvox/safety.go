package main

import (
	"fmt"

	"github.com/tauvox/tauvox/internal/cli"
	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/mapset"
)

// checkOutput refuses an output that is, lies inside or contains an
// input (output.Check).
func checkOutput(out string, inputs ...string) error { return output.Check(out, inputs...) }

// newStage starts an output folder (mapset.NewStage, or
// mapset.NewStageReplacing for a folder named by --force=DIR) and prints,
// as notes, what it did to the leftovers of an earlier run of the same
// output that was killed (an interrupted replacement rolled back or
// finished).
func newStage(e *env, out string, force cli.Force) (*mapset.Stage, error) {
	all, err := force.All(out)
	if err != nil {
		return nil, err
	}
	var st *mapset.Stage
	if all {
		st, err = mapset.NewStageReplacing(out)
	} else {
		st, err = mapset.NewStage(out, force.On)
	}
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
