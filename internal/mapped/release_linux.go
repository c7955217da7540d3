package mapped

import (
	"os"
	"syscall"
)

// Release gives back the pages of mem[from:to] that lie wholly inside it
// (madvise MADV_DONTNEED): mem must be a mapping from File. A mapped
// file's pages count in the process's resident size while they are
// mapped in; read again, they come back from the page cache (or the
// disk) with the same bytes. A read that has passed a part of the file
// releases it so that the resident size does not hold the whole file.
func Release(mem []byte, from, to int) {
	page := os.Getpagesize()
	from = (from + page - 1) / page * page // mem starts on a page
	to = to / page * page
	if from < 0 || to > len(mem) || from >= to {
		return
	}
	syscall.Madvise(mem[from:to], syscall.MADV_DONTNEED)
}
