package nifti

import (
	"errors"
	"io"
	"os"
	"runtime/debug"
	"unsafe"
)

// readFile reads the first size bytes of f into a new buffer (nothing to
// unmap).
func readFile(f *os.File, size int64) ([]byte, func(), error) {
	b := make([]byte, size)
	n, err := f.ReadAt(b, 0)
	if int64(n) != size {
		if err == nil || err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		return nil, nil, err
	}
	return b, func() {}, nil
}

// errChanged is the cause given when the mapped compressed file faults:
// it shrank, or its storage failed, while it was read.
var errChanged = errors.New("the file changed or could not be read while it was being read")

// mappedFault reports whether a recovered panic value p is a memory fault
// (debug.SetPanicOnFault) inside mem, the mapped file. Any other panic is
// not ours to turn into an error.
func mappedFault(p any, mem []byte) bool {
	f, ok := p.(interface{ Addr() uintptr })
	if !ok || len(mem) == 0 {
		return false
	}
	base := uintptr(unsafe.Pointer(unsafe.SliceData(mem)))
	a := f.Addr()
	return a >= base && a < base+uintptr(len(mem))
}

// guard runs f on the calling goroutine with faults turned into panics
// (debug.SetPanicOnFault) and returns errChanged when f faulted inside
// mem, the mapped file; any other panic goes on.
func guard(mem []byte, f func()) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer func() {
		if p := recover(); p != nil {
			if !mappedFault(p, mem) {
				panic(p)
			}
			err = errChanged
		}
	}()
	f()
	return nil
}
