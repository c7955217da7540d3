// Package halves runs two pieces of work at once: the two halves of the
// voxels, of a buffer or of a histogram, on the two CPUs a fit has at
// least. It is a leaf, so that fit and the io packages share it.
package halves

import "sync"

// Both runs f and g at once (g on a new goroutine, f on the caller's) and
// returns when both have.
func Both(f, g func()) {
	var wg sync.WaitGroup
	wg.Go(g)
	f()
	wg.Wait()
}
