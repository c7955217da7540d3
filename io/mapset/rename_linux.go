package mapset

import (
	"errors"
	"os"

	"golang.org/x/sys/unix"
)

// renameNoReplace renames from to to, failing with an error wrapping
// os.ErrExist when to exists: renameat2(2) with RENAME_NOREPLACE checks
// and renames in one step. On a file system without it, a check then a
// rename (a small race remains there).
func renameNoReplace(from, to string) error {
	err := unix.Renameat2(unix.AT_FDCWD, from, unix.AT_FDCWD, to, unix.RENAME_NOREPLACE)
	switch {
	case err == nil:
		return nil
	case errors.Is(err, unix.EEXIST):
		return &os.LinkError{Op: "rename", Old: from, New: to, Err: os.ErrExist}
	case errors.Is(err, unix.EINVAL), errors.Is(err, unix.ENOSYS), errors.Is(err, unix.EOPNOTSUPP):
		return checkThenRename(from, to)
	}
	return &os.LinkError{Op: "rename", Old: from, New: to, Err: err}
}
