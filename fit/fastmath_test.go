package fit

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestLogPos: logPos agrees with the standard library's math.Log within
// 4e-16 absolute or 2 ulp over the whole normal range (a consistency check
// against the library, common practice).
func TestLogPos(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for i := 0; i < 200000; i++ {
		x := math.Exp(rng.Float64()*1400 - 700)
		got, want := logPos(x), math.Log(x)
		if d := math.Abs(got - want); d > 2*ulp(want) && d > 4e-16 {
			t.Fatalf("logPos(%g) = %.17g, math.Log %.17g", x, got, want)
		}
	}
	for _, x := range []float64{1, 2, 0.5, math.Sqrt2 / 2, math.E, 1e-310, math.MaxFloat64, 0x1p-1022} {
		if got, want := logPos(x), math.Log(x); math.Abs(got-want) > 2*ulp(want) && math.Abs(got-want) > 4e-16 {
			t.Errorf("logPos(%g) = %.17g, want %.17g", x, got, want)
		}
	}
}

func TestLogUsable(t *testing.T) {
	for _, c := range []struct {
		x  float64
		ok bool
	}{{1, true}, {0, false}, {-1, false}, {math.NaN(), false}, {math.Inf(1), false}, {1e-310, false}, {0x1p-1022, true}} {
		if logUsable(c.x) != c.ok {
			t.Errorf("logUsable(%g) = %v", c.x, !c.ok)
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

// TestExpNeg: expNeg agrees with math.Exp within 3 ulp on [−708, 0] and
// gives 0 below (consistency with the library, common practice).
func TestExpNeg(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	for i := 0; i < 200000; i++ {
		x := -708 * rng.Float64() * rng.Float64()
		got, want := expNeg(x), math.Exp(x)
		if math.Abs(got-want) > 3*ulp(want) {
			t.Fatalf("expNeg(%g) = %.17g, math.Exp %.17g", x, got, want)
		}
	}
	for _, x := range []float64{0, -1e-300, -0.5, -1, math.Ln2 / -128, -700, -708} {
		if got, want := expNeg(x), math.Exp(x); math.Abs(got-want) > 3*ulp(want) {
			t.Errorf("expNeg(%g) = %.17g, want %.17g", x, got, want)
		}
	}
	for _, x := range []float64{-709, -1e9, math.Inf(-1), math.NaN()} {
		if got := expNeg(x); got != 0 {
			t.Errorf("expNeg(%g) = %g, want 0", x, got)
		}
	}
}

// TestExpFast: expFast agrees with math.Exp (the reference) within 3 ulp
// on [−708, 708], and is math.Exp itself beyond and for NaN and ±Inf.
func TestExpFast(t *testing.T) {
	rng := rand.New(rand.NewPCG(15, 16))
	for i := 0; i < 200000; i++ {
		x := 708 * (2*rng.Float64() - 1) * rng.Float64()
		got, want := expFast(x), math.Exp(x)
		if math.Abs(got-want) > 3*ulp(want) {
			t.Fatalf("expFast(%g) = %.17g, math.Exp %.17g", x, got, want)
		}
	}
	for _, x := range []float64{0, 1e-300, -1e-300, 0.5, 1, -1, math.Ln2 / 128, math.Ln2 / -128, 6.9, 700, 708, -708} {
		if got, want := expFast(x), math.Exp(x); math.Abs(got-want) > 3*ulp(want) {
			t.Errorf("expFast(%g) = %.17g, want %.17g", x, got, want)
		}
	}
	for _, x := range []float64{709, -709, 1e9, math.Inf(1), math.Inf(-1)} {
		if got, want := expFast(x), math.Exp(x); got != want {
			t.Errorf("expFast(%g) = %g, want %g", x, got, want)
		}
	}
	if got := expFast(math.NaN()); !math.IsNaN(got) {
		t.Errorf("expFast(NaN) = %g", got)
	}
}
