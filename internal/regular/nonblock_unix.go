//go:build unix

package regular

import (
	"os"
	"syscall"
)

// nonBlock makes opening a FIFO with no writer return at once.
const nonBlock = syscall.O_NONBLOCK

// clearNonBlock restores blocking reads on a regular file (it has no
// effect on them, but later readers should not see a surprising flag).
func clearNonBlock(f *os.File) error {
	rc, err := f.SyscallConn()
	if err != nil {
		return err
	}
	var serr error
	if err := rc.Control(func(fd uintptr) { serr = syscall.SetNonblock(int(fd), false) }); err != nil {
		return err
	}
	return serr
}
