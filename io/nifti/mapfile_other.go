//go:build !(linux || darwin || freebsd || netbsd || openbsd || dragonfly)

package nifti

import "os"

// mapFile reads the first size bytes of f into memory where files are not
// mapped here (see mapfile_unix.go).
func mapFile(f *os.File, size int64) ([]byte, func(), error) { return readFile(f, size) }
