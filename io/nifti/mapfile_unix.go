//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package nifti

import (
	"os"
	"syscall"
)

// mapFile returns the first size bytes of f mapped read-only into memory,
// and the function that unmaps them. Mapping a compressed file the page
// cache holds costs a fraction of a millisecond; reading it into a fresh
// buffer costs a copy and the faults of as many new pages (on a 47 MB
// .nii.gz 12–17 ms, measured on the 2-CPU machine of docs/benchmarks.md).
// A mapped file that shrinks while it is read makes the reader fault:
// readers of the mapping run with debug.SetPanicOnFault and turn such a
// fault into an error (fault.go).
func mapFile(f *os.File, size int64) ([]byte, func(), error) {
	if size <= 0 || int64(int(size)) != size {
		return readFile(f, size)
	}
	b, err := syscall.Mmap(int(f.Fd()), 0, int(size), syscall.PROT_READ, syscall.MAP_SHARED)
	if err != nil {
		return readFile(f, size)
	}
	return b, func() { syscall.Munmap(b) }, nil
}
