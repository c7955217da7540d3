package mapset

import (
	"errors"
	"os"
)

// checkThenRename is the fallback of renameNoReplace.
func checkThenRename(from, to string) error {
	if _, err := os.Lstat(to); err == nil {
		return &os.LinkError{Op: "rename", Old: from, New: to, Err: os.ErrExist}
	} else if !errors.Is(err, os.ErrNotExist) {
		return err
	}
	return os.Rename(from, to)
}

// held reports whether the output dir is a finished stage whose owner has
// not let go yet (between its rename into place and its release).
func held(dir string) bool { return owned(dir) }
