package halves

import (
	"sync/atomic"
	"testing"
)

// TestBoth: both functions have run, once each, when Both returns, and g
// runs while f waits for it (f would block forever if they ran in turn).
func TestBoth(t *testing.T) {
	var n atomic.Int32
	started := make(chan struct{})
	Both(func() { <-started; n.Add(1) }, func() { close(started); n.Add(10) })
	if got := n.Load(); got != 11 {
		t.Fatalf("after Both: %d, want 11 (each function once)", got)
	}
}
