package fit

import (
	"math"

	"github.com/tauvox/tauvox/volume"
)

// DoubleAngle maps the transmit field by the double-angle method (Insko &
// Bolinger 1993, J Magn Reson A 103:82): two images at nominal flip angles
// α and 2α with a repetition time long enough for full recovery (TR ≥ 5·T1),
// so that S(α) = M0·sin(B1·α). Their ratio gives the actual angle in closed
// form,
//
//	S(2α)/S(α) = sin 2θ/sin θ = 2·cos θ,   θ = arccos(S(2α)/(2·S(α))),
//
// and B1 = θ/α. The magnitude of S(2α) folds beyond θ = 90°, so the method
// is unambiguous only for B1·α ≤ 90° (α = 60° covers B1 up to 1.5). A TR
// that is not ≫ T1 biases θ up for long-T1 material: the spoiled
// steady state multiplies the ratio by (1 − E1·cos θ)/(1 − E1·cos 2θ) < 1
// (about +0.4 % at TR 10 s, T1 2000 ms, α = 60°); the protocol check does
// not know T1 and cannot refuse it.
//
// Output: TB1map, percent of the nominal angle. Standard errors and R² are
// NaN: two samples determine (M0, θ) exactly.
type DoubleAngle struct{}

var _ Model = (*DoubleAngle)(nil)

// Name returns "b1-dam".
func (m *DoubleAngle) Name() string { return "b1-dam" }

// Method returns "ratio".
func (m *DoubleAngle) Method() string { return string(Ratio) }

// Outputs lists B1 (TB1map, percent).
func (m *DoubleAngle) Outputs() []Param { return b1Output }

// MinPoints is 2.
func (m *DoubleAngle) MinPoints() int { return 2 }

// NewFitter checks for exactly two volumes whose flip angles are α and 2α
// (within 0.5 %), 0° < α < 90°, and returns a workspace.
func (m *DoubleAngle) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	if len(acq) != 2 {
		return nil, protocolErr("%d volumes; the double-angle method needs 2 (flip angles α and 2α)", len(acq))
	}
	for i, a := range acq {
		if !finite(a.FlipAngle) || !(a.FlipAngle > 0 && a.FlipAngle < 180) {
			return nil, protocolErr("flip angle of volume %d is missing or outside (0°, 180°)", i+1)
		}
	}
	p := b1Pair{lo: 0, hi: 1}
	if acq[0].FlipAngle > acq[1].FlipAngle {
		p = b1Pair{lo: 1, hi: 0}
	}
	a1, a2 := acq[p.lo].FlipAngle, acq[p.hi].FlipAngle
	if math.Abs(a2/a1-2) > 0.01 {
		return nil, protocolErr("flip angles %g° and %g°; the double-angle method needs α and 2α", a1, a2)
	}
	if a1 >= 90 {
		return nil, protocolErr("flip angle α = %g°; the double-angle method needs α below 90°", a1)
	}
	return &damFitter{p: p, alpha: a1 * math.Pi / 180}, nil
}

type damFitter struct {
	p     b1Pair
	alpha float64 // nominal α, radians
}

// Fit computes B1 of one voxel.
func (f *damFitter) Fit(dst *Result, y []float64, _ Covariates) {
	s1, s2, ok := f.p.samples(dst, y)
	if !ok {
		return
	}
	c := s2 / (2 * s1)
	if !(c < 1) {
		// S(2α) ≥ 2·S(α) has no angle (noise at a tiny flip angle).
		dst.fail(OutOfBounds)
		return
	}
	b1Done(dst, math.Acos(c), f.alpha)
}

// DAMSignal returns the double-angle pair for equilibrium signal m0,
// actual/nominal ratio b1 and nominal angle alpha (degrees) with full
// recovery: M0·sin(B1·α), M0·sin(2·B1·α), as magnitudes.
func DAMSignal(m0, b1, alpha float64) (s1, s2 float64) {
	a := b1 * alpha * math.Pi / 180
	return math.Abs(m0 * math.Sin(a)), math.Abs(m0 * math.Sin(2*a))
}
