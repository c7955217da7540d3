package fit

import (
	"math"
	"math/rand/v2"
)

// Rician returns the magnitude of a noiseless real signal a after adding
// independent Gaussian noise of SD sigma to its real and imaginary parts:
//
//	M = √((a + n₁)² + n₂²),   n₁, n₂ ~ N(0, σ²),
//
// whose distribution is Rician (Gudbjartsson & Patz 1995, MRM 34:910).
func Rician(rng *rand.Rand, a, sigma float64) float64 {
	return math.Hypot(a+sigma*rng.NormFloat64(), sigma*rng.NormFloat64())
}

// RicianMean returns E[M] of a Rician magnitude with noiseless amplitude a
// and noise SD sigma, in the overflow-free form with exponentially scaled
// Bessel functions (check-values §1.4 [C]):
//
//	E[M] = σ·√(π/2)·[(1 + 2x)·I0e(x) + 2x·I1e(x)],   x = a²/(4σ²).
func RicianMean(a, sigma float64) float64 {
	x := a * a / (4 * sigma * sigma)
	return sigma * math.Sqrt(math.Pi/2) * ((1+2*x)*i0e(x) + 2*x*i1e(x))
}

// ricianMeanDeriv returns E[M] and dE[M]/da for amplitude a. With
// x = a²/(4σ²) and I0' = I1, I1' = I0 − I1/x one finds
// d/dx{e^(−x)[(1+2x)I0 + 2x·I1]} = e^(−x)[I0 + I1], so
//
//	dE/da = √(π/2)·a/(2σ)·[I0e(x) + I1e(x)]
//
// (derived here; it tends to 1 at high SNR, as E[M] → a).
func ricianMeanDeriv(a, sigma float64) (mean, deriv float64) {
	x := a * a / (4 * sigma * sigma)
	b0, b1 := i0e(x), i1e(x)
	const k = 1.2533141373155002 // √(π/2)
	return sigma * k * ((1+2*x)*b0 + 2*x*b1), k * a / (2 * sigma) * (b0 + b1)
}

// i0e and i1e are the exponentially scaled modified Bessel functions
// e^(−x)·I0(x) and e^(−x)·I1(x) for x ≥ 0, from the polynomial
// approximations of Abramowitz & Stegun 1964, 9.8.1–9.8.4 (|ε| < 2.2e-7
// relative).
func i0e(x float64) float64 {
	if x < 3.75 {
		t := x / 3.75
		t *= t
		return math.Exp(-x) * (1 + t*(3.5156229+t*(3.0899424+t*(1.2067492+t*(0.2659732+t*(0.0360768+t*0.0045813))))))
	}
	t := 3.75 / x
	return (0.39894228 + t*(0.01328592+t*(0.00225319+t*(-0.00157565+t*(0.00916281+t*(-0.02057706+t*(0.02635537+t*(-0.01647633+t*0.00392377)))))))) / math.Sqrt(x)
}

func i1e(x float64) float64 {
	if x < 3.75 {
		t := x / 3.75
		t *= t
		return math.Exp(-x) * x * (0.5 + t*(0.87890594+t*(0.51498869+t*(0.15084934+t*(0.02658733+t*(0.00301532+t*0.00032411))))))
	}
	t := 3.75 / x
	return (0.39894228 + t*(-0.03988024+t*(-0.00362018+t*(0.00163801+t*(-0.01031555+t*(0.02282967+t*(-0.02895312+t*(0.01787654-t*0.00420059)))))))) / math.Sqrt(x)
}
