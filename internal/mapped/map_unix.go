//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package mapped

import (
	"os"
	"syscall"
)

// File returns the first size bytes of f mapped read-only into memory,
// and the function that unmaps them. Mapping a file the page cache holds
// costs a fraction of a millisecond; reading it into a fresh buffer costs
// a copy and the faults of as many new pages (on a 47 MB .nii.gz 12–17
// ms, measured on the 2-CPU machine of docs/benchmarks.md). It fails
// where the file cannot be mapped (the caller then reads it).
func File(f *os.File, size int64) ([]byte, func(), error) {
	if size <= 0 || int64(int(size)) != size {
		return nil, nil, errNoMap
	}
	b, err := syscall.Mmap(int(f.Fd()), 0, int(size), syscall.PROT_READ, syscall.MAP_SHARED)
	if err != nil {
		return nil, nil, err
	}
	return b, func() { syscall.Munmap(b) }, nil
}
