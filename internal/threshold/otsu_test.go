package threshold

import (
	"math"
	"testing"
)

// TestOtsu: two clean classes (air near 0, object near 1000) give a
// threshold inside the gap, in the middle of the bins that separate them
// equally (Otsu 1979: every level in a clean gap maximises the
// between-class variance); a histogram built in parts equals one built at
// once; no positive value gives 0.
func TestOtsu(t *testing.T) {
	var v []float32
	for i := 0; i < 300; i++ {
		v = append(v, float32(i%20), float32(980+i%40))
	}
	got := Otsu(v)
	// The gap runs from bin ⌊19/1019·255⌋ = 4 to bin ⌊980/1019·255⌋ = 245;
	// the middle of bins 4…244 is 124, returned as (124 + 1)/255·top.
	want := 125.0 / 255 * 1019
	if math.Abs(got-want) > 1e-9 {
		t.Errorf("Otsu = %v, want %v", got, want)
	}
	var h Histogram
	h.Raise(v[:250])
	h.Raise(v[250:])
	h.Add(v[:250])
	h.Add(v[250:])
	if h.Otsu() != got {
		t.Errorf("in parts %v, at once %v", h.Otsu(), got)
	}
	if Otsu([]float32{0, -1, float32(math.NaN())}) != 0 {
		t.Error("no positive value: want 0")
	}
}
