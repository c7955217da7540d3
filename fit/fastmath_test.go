package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestLogPos: logPos agrees with the standard library's math.Log to 2 ulp
// over many decades (it is the same algorithm, so this is a consistency
// check against the library, common practice).
func TestLogPos(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for i := 0; i < 200000; i++ {
		x := math.Exp(rng.Float64()*1400 - 700)
		got, want := logPos(x), math.Log(x)
		if d := math.Abs(got - want); d > 2*ulp(want) {
			t.Fatalf("logPos(%g) = %.17g, math.Log %.17g", x, got, want)
		}
	}
	for _, x := range []float64{1, 2, 0.5, math.Sqrt2 / 2, math.E, 1e-310, math.MaxFloat64, math.SmallestNonzeroFloat64} {
		if got, want := logPos(x), math.Log(x); math.Abs(got-want) > 2*ulp(want) {
			t.Errorf("logPos(%g) = %.17g, want %.17g", x, got, want)
		}
	}
}

func ulp(x float64) float64 {
	x = math.Abs(x)
	if x == 0 {
		return math.SmallestNonzeroFloat64
	}
	return math.Nextafter(x, math.Inf(1)) - x
}
