package fit

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/floats/scalar"
)

// TestSignalCheckValues uses check-values §2.4 [C].
func TestSignalCheckValues(t *testing.T) {
	x := Tissue{PD: 1, T1: 1000, T2: 1e12}
	// SPGR, TR = 15 ms, T1 = 1000 ms: S(3°) = 0.04798467, S(17°) = 0.07513619.
	for _, c := range []struct{ fa, want float64 }{{3, 0.04798467}, {17, 0.07513619}} {
		if got := Signal(SeqGradientEcho, x, 0, math.NaN(), 15, c.fa, 0); !scalar.EqualWithinAbs(got, c.want, 5e-9) {
			t.Errorf("SPGR(%g°) = %.8f, want %.8f", c.fa, got, c.want)
		}
	}
	// IR, TR = 5000 ms, T1 = 1000 ms (signed values; Signal returns |S|).
	ti := []float64{50, 100, 200, 400, 800, 1600, 3200}
	want := []float64{-0.895721, -0.802937, -0.630724, -0.333902, 0.108080, 0.602945, 0.925214}
	for i := range ti {
		if got := Signal(SeqInversionRecovery, x, 0, ti[i], 5000, 90, 0); !scalar.EqualWithinAbs(got, math.Abs(want[i]), 5e-7) {
			t.Errorf("IR(TI=%g) = %.6f, want |%.6f|", ti[i], got, want[i])
		}
	}
	// Null at TI0 = T1·ln[2/(1+e^(−TR/T1))] = 644.560 ms for TR = 3000 ms.
	if got := Signal(SeqInversionRecovery, x, 0, 644.560, 3000, 90, 0); got > 1e-6 {
		t.Errorf("IR signal at the null = %g", got)
	}
	// Spin echo with TR → ∞ is the pure exponential.
	if got := Signal(SeqSpinEcho, Tissue{PD: 2, T1: 1000, T2: 100}, 50, 0, math.Inf(1), 90, 0); !scalar.EqualWithinRel(got, 2*math.Exp(-0.5), 1e-15) {
		t.Errorf("SE = %g", got)
	}
}
