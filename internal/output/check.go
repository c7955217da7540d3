package output

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
)

// Check refuses an output path (folder or file) that would mix with
// or destroy an input: one that is an input, lies inside an input folder
// (a DICOM folder scanned again would find the outputs, and the outputs
// would be read as input), or contains an input (--force would delete the
// input when the new output replaces the folder). Empty inputs are
// skipped; "demo" names the built-in phantom definition, not a file.
// Paths are compared absolute, cleaned, and with symbolic links of their
// existing parts resolved, so "a/../b" and a link to the input folder are
// caught too. The error names the output and the input on one line.
func Check(out string, inputs ...string) error {
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
