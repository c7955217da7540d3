package pipeline

import (
	"runtime/debug"
	"sync"
)

// gcMode tracks the fits running in this process (several at once under
// batch --jobs), so that a lone one-slab fit can run without collections
// triggered by the heap's growth, and any other fit with them.
//
// A one-slab fit allocates its buffers once and they live to the end;
// what becomes garbage (the end of a split read, the samples after the
// fit) is collected where it does (runtime.GC in runSlabs and io/nifti).
// The collections the heap's growth triggers find nothing to free and
// stop both CPUs: on the 47 MB series of docs/benchmarks.md there were
// three, one with a 3.5 ms pause while the decoders were preempted, and
// without them the fit took 0.46 s instead of 0.48 s (medians of twelve).
// The soft memory limit runSlabs sets still bounds the heap. A fit of
// several slabs, though, relies on them to keep its resident size near
// its budget, so the collector is turned back on as soon as a second fit
// starts, whatever its kind.
var gcMode struct {
	sync.Mutex
	active int  // fits running
	off    bool // GC percent turned off by a lone one-slab fit
	prev   int  // the GC percent before
}

// enterRun registers a fit and returns the function that ends it. A fit
// of one slab (oneSlab) that runs alone turns the GC percent off until it
// ends or another fit starts.
func enterRun(oneSlab bool) (end func()) {
	gcMode.Lock()
	defer gcMode.Unlock()
	gcMode.active++
	if gcMode.off {
		debug.SetGCPercent(gcMode.prev)
		gcMode.off = false
	}
	if oneSlab && gcMode.active == 1 {
		gcMode.prev = debug.SetGCPercent(-1)
		gcMode.off = true
	}
	return func() {
		gcMode.Lock()
		defer gcMode.Unlock()
		gcMode.active--
		if gcMode.off && gcMode.active == 0 {
			debug.SetGCPercent(gcMode.prev)
			gcMode.off = false
		}
	}
}
