//go:build !(linux || darwin || freebsd || netbsd || openbsd || dragonfly)

package mapped

import "os"

// File fails where files are not mapped here (see map_unix.go): the
// caller reads the file instead.
func File(f *os.File, size int64) ([]byte, func(), error) { return nil, nil, errNoMap }
