package output

import (
	"os"
	"syscall"
)

// syncFileRangeWrite is SYNC_FILE_RANGE_WRITE (include/uapi/linux/fs.h).
const syncFileRangeWrite = 2

// startSync starts the write-back of f's dirty pages (sync_file_range(2),
// offset 0 and length 0: to the end of the file). Errors are ignored: the
// sync in Commit reports them.
func startSync(f *os.File) {
	if sc, err := f.SyscallConn(); err == nil {
		sc.Control(func(fd uintptr) {
			syscall.Syscall6(syscall.SYS_SYNC_FILE_RANGE, fd, 0, 0, syncFileRangeWrite, 0, 0)
		})
	}
}
