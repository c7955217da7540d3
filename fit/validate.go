package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"

	"github.com/tauvox/tauvox/volume"
)

// Noise selects the noise added to simulated samples.
type Noise int

const (
	// GaussianNoise adds N(0, σ²) to the noiseless magnitude: the setting
	// the Cramér–Rao bound of CRLB assumes.
	GaussianNoise Noise = iota
	// RicianNoise takes the magnitude after adding N(0, σ²) to the real and
	// imaginary parts (Rician). The reported bound is still the Gaussian
	// one, which the Rician bound approaches at high SNR (Karlsen et al.
	// 1999; Sijbers & den Dekker 2004, check-values §1.5).
	RicianNoise
)

// String returns "gaussian" or "rician".
func (n Noise) String() string {
	if n == RicianNoise {
		return "rician"
	}
	return "gaussian"
}

// Validation describes a Monte Carlo study of a model and protocol: for
// every true time constant, Trials noisy voxels are simulated, fitted, and
// the estimates compared with the truth, the Cramér–Rao lower bound and
// the standard errors the fit reports. The zero value of each optional
// field is right.
type Validation struct {
	// Model is the model and method under test: MonoExp (without offset),
	// InversionRecovery, VariableFlipAngle or SaturationRecovery.
	Model Model
	// Acq is the protocol, one entry per sample.
	Acq []volume.Acquisition
	// Truth lists the true time constants (T2, T2* or T1) in ms.
	Truth []float64
	// M0 is the true equilibrium signal; 1 if 0.
	M0 float64
	// SNR is M0/σ; σ = M0/SNR is the noise SD. Required.
	SNR float64
	// Noise is GaussianNoise (the zero value) or RicianNoise.
	Noise Noise
	// Trials per true value; 1000 if 0.
	Trials int
	// Seed of the noise. The results depend only on Seed, never on
	// Workers: each block of validationBlock trials has its own stream,
	// rand.NewPCG(Seed, value index·2³² + block index).
	Seed uint64
	// Workers is the number of goroutines; 0 means runtime.NumCPU().
	Workers int
}

// ValidationRow is the outcome for one true value. Statistics of the
// estimates are over the trials that converged (Status OK).
type ValidationRow struct {
	Truth  float64 `json:"truth_ms"`
	Trials int     `json:"trials"`
	OK     int     `json:"converged"`
	Mean   float64 `json:"mean_ms"`
	// BiasPct is 100·(Mean − Truth)/Truth.
	BiasPct float64 `json:"bias_pct"`
	SD      float64 `json:"sd_ms"`
	// SDErr is the standard error of SD, SD/√(2(n−1)) (normal theory).
	SDErr float64 `json:"sd_err_ms"`
	// CRLB is the Cramér–Rao lower bound on the SD of an unbiased
	// estimate, for Gaussian noise of the same σ.
	CRLB float64 `json:"crlb_sd_ms"`
	// Efficiency is CRLB²/SD² (1 for an efficient estimator).
	Efficiency float64 `json:"efficiency"`
	// MeanSE is the mean of the reported standard errors.
	MeanSE float64 `json:"mean_se_ms"`
	// Cover1 and Cover196 are the fractions of converged trials with
	// |estimate − truth| ≤ 1 and ≤ 1.96 reported standard errors (a trial
	// without a finite SE counts as not covered).
	Cover1   float64 `json:"coverage_1se"`
	Cover196 float64 `json:"coverage_1.96se"`
}

// validationBlock is the number of trials that share one noise stream.
const validationBlock = 256

// Validate runs the study. It returns an error for a model it cannot
// simulate, a protocol the model refuses, a missing SNR or a bad truth,
// or a cancelled context.
func Validate(ctx context.Context, v *Validation) ([]ValidationRow, error) {
	m0 := v.M0
	if m0 == 0 {
		m0 = 1
	}
	trials := v.Trials
	if trials <= 0 {
		trials = 1000
	}
	if !(v.SNR > 0) || math.IsInf(v.SNR, 0) {
		return nil, errors.New("fit: validation needs a positive SNR")
	}
	if len(v.Truth) == 0 {
		return nil, errors.New("fit: validation needs at least one true value")
	}
	for _, t := range v.Truth {
		if !(t > 0) || math.IsInf(t, 0) {
			return nil, fmt.Errorf("fit: true value %g ms is not positive", t)
		}
	}
	if _, err := v.Model.NewFitter(v.Acq); err != nil {
		return nil, err
	}
	n := len(v.Acq)
	sigma := m0 / v.SNR
	sig := make([][]float64, len(v.Truth))
	rows := make([]ValidationRow, len(v.Truth))
	for i, t := range v.Truth {
		s, jac, p, k, err := TruthSignal(v.Model, v.Acq, m0, t)
		if err != nil {
			return nil, err
		}
		sig[i] = s
		sd := make([]float64, p)
		rows[i] = ValidationRow{Truth: t, Trials: trials, CRLB: math.NaN()}
		if CRLB(sd, jac, n, p, sigma) {
			rows[i].CRLB = sd[k]
		}
	}
	est := make([][]float64, len(v.Truth))
	se := make([][]float64, len(v.Truth))
	ok := make([][]bool, len(v.Truth))
	for i := range est {
		est[i], se[i], ok[i] = make([]float64, trials), make([]float64, trials), make([]bool, trials)
	}
	blocks := (trials + validationBlock - 1) / validationBlock
	jobs := len(v.Truth) * blocks
	workers := v.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	errs := make([]error, workers)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			f, err := v.Model.NewFitter(v.Acq)
			if err != nil {
				errs[w] = err
				return
			}
			res := NewResult(v.Model)
			y := make([]float64, n)
			for {
				if ctx.Err() != nil {
					errs[w] = ctx.Err()
					return
				}
				j := int(next.Add(1)) - 1
				if j >= jobs {
					return
				}
				vi, b := j/blocks, j%blocks
				rng := rand.New(rand.NewPCG(v.Seed, uint64(vi)<<32|uint64(b)))
				s := sig[vi]
				for tr := b * validationBlock; tr < min((b+1)*validationBlock, trials); tr++ {
					for i, a := range s {
						a = math.Abs(a)
						if v.Noise == RicianNoise {
							y[i] = Rician(rng, a, sigma)
						} else {
							y[i] = a + sigma*rng.NormFloat64()
						}
					}
					f.Fit(res, y, Covariates{})
					est[vi][tr], se[vi][tr], ok[vi][tr] = res.Values[0], res.SE[0], res.Status == OK
				}
			}
		}(w)
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, err
	}
	for i := range rows {
		summarise(&rows[i], est[i], se[i], ok[i])
	}
	return rows, nil
}

// summarise fills the statistics of r from the trials, in trial order.
func summarise(r *ValidationRow, est, se []float64, ok []bool) {
	var sum, sumSE float64
	nSE := 0
	for i, e := range est {
		if ok[i] {
			r.OK++
			sum += e
			if finite(se[i]) {
				sumSE += se[i]
				nSE++
			}
		}
	}
	nan := math.NaN()
	r.Mean, r.BiasPct, r.SD, r.SDErr, r.Efficiency, r.MeanSE, r.Cover1, r.Cover196 = nan, nan, nan, nan, nan, nan, nan, nan
	if r.OK == 0 {
		return
	}
	r.Mean = sum / float64(r.OK)
	r.BiasPct = 100 * (r.Mean - r.Truth) / r.Truth
	var ss float64
	c1, c2 := 0, 0
	for i, e := range est {
		if !ok[i] {
			continue
		}
		d := e - r.Mean
		ss += d * d
		dev := math.Abs(e - r.Truth)
		if finite(se[i]) {
			if dev <= se[i] {
				c1++
			}
			if dev <= 1.96*se[i] {
				c2++
			}
		}
	}
	r.Cover1 = float64(c1) / float64(r.OK)
	r.Cover196 = float64(c2) / float64(r.OK)
	if nSE > 0 {
		r.MeanSE = sumSE / float64(nSE)
	}
	if r.OK > 1 {
		r.SD = math.Sqrt(ss / float64(r.OK-1))
		r.SDErr = r.SD / math.Sqrt(2*float64(r.OK-1))
		r.Efficiency = r.CRLB * r.CRLB / (r.SD * r.SD)
	}
}

// TruthSignal returns the noiseless signal of model m for protocol acq at
// equilibrium signal m0 and time constant t (ms), the n×p Jacobian of the
// signal with respect to the model's p fitted parameters (row-major, for
// CRLB), and the index k of the time constant among them. Magnitude models
// (inversion recovery) return the signed signal; |s| is what is measured,
// and the sign of a row does not change JᵀJ.
//
//   - MonoExp: s = M0·exp(−TE/T), parameters (M0, T).
//   - InversionRecovery: s = a + b·exp(−TI/T1) with a perfect inversion,
//     a = M0·(1 + exp(−TR/T1)) (a = M0 when TR is unknown), b = −2·M0;
//     parameters (a, b, T1), columns 1, e and b·TI·e/T1² (check-values
//     §1.5).
//   - VariableFlipAngle: s = M0·sin α·(1 − E1)/(1 − E1·cos α), E1 =
//     exp(−TR/T1), parameters (M0, T1).
//   - SaturationRecovery: s = M0·(1 − k·exp(−TR/T1)) with k = 1,
//     parameters (M0, T1) and, with Efficiency, k.
func TruthSignal(m Model, acq []volume.Acquisition, m0, t float64) (s, jac []float64, p, k int, err error) {
	n := len(acq)
	s = make([]float64, n)
	unsupported := func() error {
		return fmt.Errorf("fit: validation does not simulate model %s (t2, t2star, t1-ir, t1-vfa, t1-sr)", m.Name())
	}
	switch mm := m.(type) {
	case *MonoExp:
		if mm.Offset {
			return nil, nil, 0, 0, errors.New("fit: validation does not simulate the offset model")
		}
		te := make([]float64, n)
		for i, a := range acq {
			te[i] = a.EchoTime
			s[i] = m0 * math.Exp(-a.EchoTime/t)
		}
		return s, MonoExpJacobian(nil, te, m0, t), 2, 1, nil
	case *InversionRecovery:
		p, k = 3, 2
		jac = make([]float64, n*p)
		for i, x := range acq {
			a := m0
			if tr := x.RepetitionTime; tr > 0 && !math.IsInf(tr, 0) {
				a = m0 * (1 + math.Exp(-tr/t))
			}
			b := -2 * m0
			e := math.Exp(-x.InversionTime / t)
			s[i] = a + b*e
			jac[i*p], jac[i*p+1], jac[i*p+2] = 1, e, b*x.InversionTime*e/(t*t)
		}
		return s, jac, p, k, nil
	case *VariableFlipAngle:
		p, k = 2, 1
		jac = make([]float64, n*p)
		for i, x := range acq {
			al := x.FlipAngle * math.Pi / 180
			sn, cs := math.Sincos(al)
			e1 := math.Exp(-x.RepetitionTime / t)
			d := 1 - e1*cs
			s[i] = m0 * sn * (1 - e1) / d
			// ∂/∂E1 of (1 − E1)/(1 − E1·cos α) is (cos α − 1)/(1 − E1·cos α)²;
			// ∂E1/∂T1 = E1·TR/T1².
			jac[i*p] = sn * (1 - e1) / d
			jac[i*p+1] = m0 * sn * (cs - 1) / (d * d) * e1 * x.RepetitionTime / (t * t)
		}
		return s, jac, p, k, nil
	case *SaturationRecovery:
		p, k = 2, 1
		if mm.Efficiency {
			p = 3
		}
		jac = make([]float64, n*p)
		for i, x := range acq {
			e := math.Exp(-x.RepetitionTime / t)
			s[i] = m0 * (1 - e)
			jac[i*p] = 1 - e
			jac[i*p+1] = -m0 * e * x.RepetitionTime / (t * t)
			if mm.Efficiency {
				jac[i*p+2] = -m0 * e
			}
		}
		return s, jac, p, k, nil
	}
	return nil, nil, 0, 0, unsupported()
}
