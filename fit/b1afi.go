package fit

import (
	"math"

	"github.com/tauvox/tauvox/volume"
)

// ActualFlipAngle maps the transmit field by actual flip-angle imaging
// (Yarnykh 2007, Magn Reson Med 57:192): one flip angle α, two interleaved
// repetition times TR1 < TR2 with ideal spoiling, the image S1 acquired in
// the TR1 interval and S2 in the TR2 interval. In the steady state (Yarnykh
// 2007, eq. 2)
//
//	S1 = M0·sin θ·(1 − E2 + (1 − E1)·E2·cos θ)/(1 − E1·E2·cos²θ)
//	S2 = M0·sin θ·(1 − E1 + (1 − E2)·E1·cos θ)/(1 − E1·E2·cos²θ),
//
// Ei = exp(−TRi/T1); for TR1, TR2 ≪ T1 the ratio r = S2/S1 tends to
// (1 + n·cos θ)/(n + cos θ), n = TR2/TR1, whence (eq. 4)
//
//	θ = arccos((r·n − 1)/(n − r)),   B1 = θ/α.
//
// The approximation biases θ low by less than 0.5 % for T1 ≥ 1000 ms with
// TR1/TR2 = 20/100 ms and α = 60° over B1 0.6–1.4 (1.6 % at T1 = 300 ms;
// computed from eq. 2 by testdata/gen/b1_refs.py).
//
// Output: TB1map, percent of the nominal angle. Standard errors and R² are
// NaN: two samples determine (M0, θ) exactly.
type ActualFlipAngle struct{}

var _ Model = (*ActualFlipAngle)(nil)

// Name returns "b1-afi".
func (m *ActualFlipAngle) Name() string { return "b1-afi" }

// Method returns "ratio".
func (m *ActualFlipAngle) Method() string { return string(Ratio) }

// Outputs lists B1 (TB1map, percent).
func (m *ActualFlipAngle) Outputs() []Param { return b1Output }

// MinPoints is 2.
func (m *ActualFlipAngle) MinPoints() int { return 2 }

// NewFitter checks for exactly two volumes with one flip angle in (0°,
// 180°) and two different repetition times, and returns a workspace.
func (m *ActualFlipAngle) NewFitter(acq []volume.Acquisition) (Fitter, error) {
	if len(acq) != 2 {
		return nil, protocolErr("%d volumes; actual flip-angle imaging needs 2 (repetition times TR1 and TR2)", len(acq))
	}
	for i, a := range acq {
		if !finite(a.RepetitionTime) || !(a.RepetitionTime > 0) {
			return nil, protocolErr("repetition time of volume %d is missing or invalid", i+1)
		}
		if err := spoiledTRErr(m.Name(), a.RepetitionTime, i+1); err != nil {
			return nil, err
		}
		if !finite(a.FlipAngle) || !(a.FlipAngle > 0 && a.FlipAngle < 180) {
			return nil, protocolErr("flip angle of volume %d is missing or outside (0°, 180°)", i+1)
		}
	}
	if acq[0].FlipAngle != acq[1].FlipAngle {
		return nil, protocolErr("flip angles %g° and %g°; actual flip-angle imaging uses one angle", acq[0].FlipAngle, acq[1].FlipAngle)
	}
	p := b1Pair{lo: 0, hi: 1}
	if acq[0].RepetitionTime > acq[1].RepetitionTime {
		p = b1Pair{lo: 1, hi: 0}
	}
	n := acq[p.hi].RepetitionTime / acq[p.lo].RepetitionTime
	if !(n > 1.01) {
		return nil, protocolErr("repetition times %g and %g ms; actual flip-angle imaging needs TR2 > TR1", acq[p.lo].RepetitionTime, acq[p.hi].RepetitionTime)
	}
	return &afiFitter{p: p, n: n, alpha: acq[0].FlipAngle * math.Pi / 180}, nil
}

type afiFitter struct {
	p     b1Pair  // lo: the TR1 image S1, hi: the TR2 image S2
	n     float64 // TR2/TR1
	alpha float64 // nominal α, radians
}

// Fit computes B1 of one voxel.
func (f *afiFitter) Fit(dst *Result, y []float64, _ Covariates) {
	s1, s2, ok := f.p.samples(dst, y)
	if !ok {
		return
	}
	r := s2 / s1
	c := (r*f.n - 1) / (f.n - r)
	if !(c > -1 && c < 1) {
		dst.fail(OutOfBounds)
		return
	}
	b1Done(dst, math.Acos(c), f.alpha)
}

// AFISignal returns the AFI pair (S1 in the TR1 interval, S2 in the TR2
// interval) of Yarnykh 2007, eq. 2, for equilibrium signal m0, T1 and the
// repetition times in ms, and the actual angle B1·alpha (alpha in degrees).
func AFISignal(m0, t1, tr1, tr2, b1, alpha float64) (s1, s2 float64) {
	th := b1 * alpha * math.Pi / 180
	e1, e2 := math.Exp(-tr1/t1), math.Exp(-tr2/t1)
	s, c := math.Sincos(th)
	d := 1 - e1*e2*c*c
	return m0 * s * (1 - e2 + (1-e1)*e2*c) / d, m0 * s * (1 - e1 + (1-e2)*e1*c) / d
}
