package prefault

import (
	"os"
	"syscall"
)

// madvPopulateWrite is MADV_POPULATE_WRITE (Linux 5.14,
// include/uapi/asm-generic/mman-common.h).
const madvPopulateWrite = 23

func populate(p, n uintptr) {
	page := uintptr(os.Getpagesize())
	from := (p + page - 1) &^ (page - 1)
	to := (p + n) &^ (page - 1)
	if to > from {
		// Refused (an older kernel): the writes fault the pages in.
		syscall.Syscall(syscall.SYS_MADVISE, from, to-from, madvPopulateWrite)
	}
}
