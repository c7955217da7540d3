package main

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/tauvox/tauvox/io/mapset"
)

// checkOutput refuses an output path (folder or file) that would mix with
// or destroy an input: one that is an input, lies inside an input folder
// (a DICOM folder scanned again would find the outputs, and the outputs
// would be read as input), or contains an input (--force would delete the
// input when the new output replaces the folder). Empty inputs are
// skipped; "demo" names the built-in phantom definition, not a file.
// Paths are compared absolute, cleaned, and with symbolic links of their
// existing parts resolved, so "a/../b" and a link to the input folder are
// caught too. The error names the output and the input on one line.
func checkOutput(out string, inputs ...string) error {
	o, err := resolvePath(out)
	if err != nil {
		return fmt.Errorf("%s: %v", out, err)
	}
	for _, in := range inputs {
		if in == "" || in == "demo" {
			continue
		}
		p, err := resolvePath(in)
		if err != nil {
			return fmt.Errorf("%s: %v", in, err)
		}
		st, statErr := os.Stat(p)
		isDir := statErr == nil && st.IsDir()
		switch {
		case o == p || sameFile(o, p):
			return fmt.Errorf("%s: --out is the input %s; choose another output", out, in)
		case isDir && (within(o, p) || insideByID(o, p)):
			return fmt.Errorf("%s: --out lies inside the input folder %s (a later scan of it would read the outputs as input); choose a folder outside it", out, in)
		case within(p, o) || insideByID(p, o):
			return fmt.Errorf("%s: --out contains the input %s (replacing it would delete the input); choose a folder that does not hold the inputs", out, in)
		}
	}
	return nil
}

// sameFile reports whether paths a and b both exist and are the same file
// or folder (device and inode: through bind mounts and hard links too).
func sameFile(a, b string) bool {
	sa, err := os.Stat(a)
	if err != nil {
		return false
	}
	sb, err := os.Stat(b)
	return err == nil && os.SameFile(sa, sb)
}

// insideByID reports whether an existing folder above p (p itself
// excluded) is the folder dir by device and inode, so that another path to
// the same folder (a bind mount, an alias the strings do not show) is
// caught as well.
func insideByID(p, dir string) bool {
	sd, err := os.Stat(dir)
	if err != nil || !sd.IsDir() {
		return false
	}
	for cur := filepath.Dir(p); ; cur = filepath.Dir(cur) {
		if st, err := os.Stat(cur); err == nil && os.SameFile(st, sd) {
			return true
		}
		if filepath.Dir(cur) == cur {
			return false
		}
	}
}

// within reports whether path p lies strictly inside folder dir (both
// clean and absolute).
func within(p, dir string) bool {
	rel, err := filepath.Rel(dir, p)
	return err == nil && rel != "." && rel != ".." && !strings.HasPrefix(rel, ".."+string(filepath.Separator))
}

// resolvePath returns p absolute and clean, with the symbolic links of
// its longest existing prefix resolved (the rest may not exist yet).
func resolvePath(p string) (string, error) {
	abs, err := filepath.Abs(p)
	if err != nil {
		return "", err
	}
	rest := ""
	for cur := abs; ; {
		if r, err := filepath.EvalSymlinks(cur); err == nil {
			return filepath.Join(r, rest), nil
		} else if !errors.Is(err, os.ErrNotExist) {
			return "", err
		}
		parent := filepath.Dir(cur)
		if parent == cur {
			return abs, nil
		}
		rest = filepath.Join(filepath.Base(cur), rest)
		cur = parent
	}
}

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
