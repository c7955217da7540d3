package fit

import "math"

// Tissue holds the properties a simulated voxel is made of. Times in ms.
type Tissue struct {
	PD     float64 // proton density (equilibrium magnetisation), arbitrary
	T1     float64 // ms
	T2     float64 // ms
	T2star float64 // ms; 0 means equal to T2
}

// Sequence is the kind of acquisition a signal is simulated for.
type Sequence int

const (
	// SeqSpinEcho: multi-echo spin echo, S = PD·(1 − e^(−TR/T1))·e^(−TE/T2)
	// (the simplified form for TE ≪ TR, Haacke et al. 1999; check-values
	// §1.1).
	SeqSpinEcho Sequence = iota
	// SeqGradientEcho: spoiled gradient echo (Ernst & Anderson 1966),
	// S = PD·sin α·(1 − E1)/(1 − E1·cos α)·e^(−TE/T2*), E1 = e^(−TR/T1).
	SeqGradientEcho
	// SeqInversionRecovery: S = PD·|1 − (1+κ)·e^(−TI/T1) + κ·e^(−TR/T1)| for
	// inversion efficiency κ (κ = 1 is a perfect 180°; with κ = 1 this is
	// the TR-corrected form of Barral et al. 2010, check-values §1.1).
	SeqInversionRecovery
	// SeqSaturationRecovery: S = PD·(1 − e^(−TR/T1)) · e^(−TE/T2).
	SeqSaturationRecovery
)

// Signal returns the noiseless magnitude of tissue x for one volume
// acquired with sequence seq and parameters te, ti, tr (ms) and flip angle
// fa (degrees, already scaled by any B1 factor). eff is the inversion
// efficiency κ for InversionRecovery (0 means 1).
func Signal(seq Sequence, x Tissue, te, ti, tr, fa, eff float64) float64 {
	e := func(t, tau float64) float64 {
		if tau <= 0 || t <= 0 || math.IsNaN(t) {
			if math.IsNaN(t) || t <= 0 {
				return 1
			}
			return 0
		}
		return math.Exp(-t / tau)
	}
	t2s := x.T2star
	if t2s == 0 {
		t2s = x.T2
	}
	switch seq {
	case SeqSpinEcho:
		return x.PD * (1 - e(tr, x.T1)) * e(te, x.T2)
	case SeqGradientEcho:
		a := fa * math.Pi / 180
		e1 := e(tr, x.T1)
		return x.PD * math.Sin(a) * (1 - e1) / (1 - e1*math.Cos(a)) * e(te, t2s)
	case SeqInversionRecovery:
		if eff == 0 {
			eff = 1
		}
		etr := 0.0
		if tr > 0 && !math.IsNaN(tr) && !math.IsInf(tr, 0) {
			etr = e(tr, x.T1)
		}
		return math.Abs(x.PD * (1 - (1+eff)*e(ti, x.T1) + eff*etr) * e(te, x.T2))
	case SeqSaturationRecovery:
		return x.PD * (1 - e(tr, x.T1)) * e(te, x.T2)
	}
	panic("fit: unknown sequence")
}
