package main

import (
	"errors"
	"fmt"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/io/mapset"
)

// checkOutput refuses an output that is, lies inside or contains an
// input (output.Check).
func checkOutput(out string, inputs ...string) error { return output.Check(out, inputs...) }

// forceUsage describes the --force flag of the commands that write a folder.
const forceUsage = "replace an existing output folder that holds only what tauvox wrote there; --force=DIR (the folder again) replaces it whatever it holds"

// forceFlag is --force (replace an output folder holding only what tauvox
// wrote there) or --force=DIR (replace the folder DIR, named again by the
// user, whatever it holds).
type forceFlag struct {
	on    bool
	named string
}

func (f *forceFlag) IsBoolFlag() bool { return true }
func (f *forceFlag) String() string {
	if f == nil || !f.on {
		return "false"
	}
	if f.named != "" {
		return f.named
	}
	return "true"
}
func (f *forceFlag) Set(s string) error {
	if b, err := strconv.ParseBool(s); err == nil {
		f.on, f.named = b, ""
		return nil
	}
	if strings.TrimSpace(s) == "" {
		return errors.New("--force=DIR needs the folder")
	}
	f.on, f.named = true, s
	return nil
}

// all reports whether --force=DIR names the output folder out (replace it
// whatever it holds); a name of another folder is an error.
func (f forceFlag) all(out string) (bool, error) {
	if f.named == "" {
		return false, nil
	}
	if filepath.Clean(f.named) != filepath.Clean(out) {
		return false, fmt.Errorf("--force=%s names another folder than the output %s", f.named, out)
	}
	return true, nil
}

// newStage starts an output folder (mapset.NewStage, or
// mapset.NewStageReplacing for a folder named by --force=DIR) and prints,
// as notes, what it did to the leftovers of an earlier run of the same
// output that was killed (an interrupted replacement rolled back or
// finished).
func newStage(e *env, out string, force forceFlag) (*mapset.Stage, error) {
	all, err := force.all(out)
	if err != nil {
		return nil, err
	}
	var st *mapset.Stage
	if all {
		st, err = mapset.NewStageReplacing(out)
	} else {
		st, err = mapset.NewStage(out, force.on)
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
