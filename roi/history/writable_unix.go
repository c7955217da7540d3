//go:build unix

package history

import (
	"path/filepath"

	"golang.org/x/sys/unix"
)

// writable reports whether the file at path and its folder may be written
// (access(2): a read-only mount gives EROFS even to root).
func writable(path string) bool {
	return unix.Access(path, unix.W_OK) == nil && unix.Access(filepath.Dir(path), unix.W_OK) == nil
}
