package phantom

import (
	"math"
	"testing"
)

// TestReferenceAtNotANumber: a NaN or infinite session temperature is an
// error, not a NaN reference (found by FuzzParse on the demo definition).
func TestReferenceAtNotANumber(t *testing.T) {
	v := &Demo().Vials[0]
	for _, temp := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		for _, ex := range []bool{false, true} {
			val, _, _, err := v.ReferenceAt("T1", 1.5, temp, ex)
			if err == nil {
				t.Errorf("temperature %g, extrapolate %v: reference %g and no error", temp, ex, val)
			}
		}
	}
	if val, _, ok, err := v.ReferenceAt("T1", 1.5, 20, false); err != nil || !ok || !(val > 0) {
		t.Errorf("20 °C: %g %v %v", val, ok, err)
	}
}
