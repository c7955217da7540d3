// Package mapped maps whole files read-only into memory (mmap, POSIX) and
// turns a fault on such a mapping into an error. A mapped file that
// shrinks while it is read, or whose storage fails, makes its reader
// fault (SIGBUS) instead of returning an error from a read: readers run
// under Guard, which catches exactly those faults.
package mapped

import (
	"errors"
	"runtime/debug"
	"unsafe"
)

// ErrChanged is the error Guard returns for a fault on the mapping.
var ErrChanged = errors.New("the file changed or could not be read while it was being read")

var errNoMap = errors.New("mapped: files are not mapped here")

// Guard runs f on the calling goroutine with faults turned into panics
// (debug.SetPanicOnFault) and returns ErrChanged when f faulted inside
// mem, the mapped file; any other panic goes on.
func Guard(mem []byte, f func()) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer func() {
		if p := recover(); p != nil {
			if !inside(p, mem) {
				panic(p)
			}
			err = ErrChanged
		}
	}()
	f()
	return nil
}

// inside reports whether a recovered panic value p is a memory fault
// (debug.SetPanicOnFault gives it an Addr method) at an address in mem.
func inside(p any, mem []byte) bool {
	f, ok := p.(interface{ Addr() uintptr })
	if !ok || len(mem) == 0 {
		return false
	}
	base := uintptr(unsafe.Pointer(unsafe.SliceData(mem)))
	a := f.Addr()
	return a >= base && a < base+uintptr(len(mem))
}
