package prefault

import (
	"math"
	"testing"
)

// TestFloat32sKeepsContents: prefaulting a buffer (fresh, written, or a
// part of one at an odd offset) changes none of its values.
func TestFloat32sKeepsContents(t *testing.T) {
	f := make([]float32, 3<<20)
	Float32s(f[1:]) // fresh pages: still zero
	for i, v := range f {
		if v != 0 {
			t.Fatalf("fresh buffer: f[%d] = %v", i, v)
		}
	}
	for i := range f {
		f[i] = float32(i) * 0.5
	}
	f[7] = float32(math.NaN())
	Float32s(f[3 : len(f)-5])
	Float32s(nil)
	for i, v := range f {
		want := float32(i) * 0.5
		if i == 7 {
			if !math.IsNaN(float64(v)) {
				t.Fatalf("f[7] = %v, want NaN", v)
			}
			continue
		}
		if v != want {
			t.Fatalf("f[%d] = %v, want %v", i, v, want)
		}
	}
}
