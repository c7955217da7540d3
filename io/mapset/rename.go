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
