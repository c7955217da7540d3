package prefault

import (
	"runtime"
	"unsafe"
)

// Float32s maps in the pages that lie wholly inside f.
func Float32s(f []float32) {
	if len(f) > 0 {
		populate(uintptr(unsafe.Pointer(unsafe.SliceData(f))), 4*uintptr(len(f)))
		runtime.KeepAlive(f)
	}
}
