package pipeline

import (
	"runtime/debug"
	"testing"
)

// gcPercent returns the current GC percent (runtime/debug offers no
// getter: set and set back).
func gcPercent() int {
	p := debug.SetGCPercent(100)
	debug.SetGCPercent(p)
	return p
}

// TestEnterRun: a lone one-slab fit turns the GC percent off and back on
// when it ends; a second fit of any kind starting meanwhile turns it back
// on at once, and nothing turns it off again until every fit has ended;
// a fit of several slabs never turns it off.
func TestEnterRun(t *testing.T) {
	defer debug.SetGCPercent(debug.SetGCPercent(100))
	end := enterRun(true)
	if p := gcPercent(); p != -1 {
		t.Fatalf("lone one-slab fit: GC percent %d, want -1 (off)", p)
	}
	end()
	if p := gcPercent(); p != 100 {
		t.Fatalf("after it: %d, want 100", p)
	}

	endA := enterRun(true)
	endB := enterRun(false) // a second fit: collections back on
	if p := gcPercent(); p != 100 {
		t.Fatalf("two fits: %d, want 100", p)
	}
	endC := enterRun(true) // not alone: stays on
	if p := gcPercent(); p != 100 {
		t.Fatalf("three fits: %d, want 100", p)
	}
	endA()
	endB()
	endC()
	if p := gcPercent(); p != 100 {
		t.Fatalf("after all: %d, want 100", p)
	}

	end = enterRun(false)
	if p := gcPercent(); p != 100 {
		t.Fatalf("several slabs: %d, want 100", p)
	}
	end()
	if gcMode.active != 0 || gcMode.off {
		t.Fatalf("state left: %d fits, off %v", gcMode.active, gcMode.off)
	}
}
