package fit

import (
	"math"
	"sort"

	"github.com/tauvox/tauvox/volume"
)

// Shared pieces of the T1 models (InversionRecovery, SaturationRecovery,
// VariableFlipAngle): the log-spaced T1 grid of the reduced-dimension
// searches, the full covariance of a least-squares fit, protocol checks, and
// the compaction of a voxel's finite samples.

// gridMargin widens the search grid beyond the T1 bounds, to MinT/2 …
// 2·MaxT, so that data whose T1 lies just outside the bounds lead the polish
// outside (and to OutOfBounds) instead of to a poor fit inside.
const gridMargin = 2

// defaultGridSize is the number of T1 values of the reduced-dimension grid
// when a model's GridSize is 0. Over the default range 0.5…20000 ms it
// spaces the grid by 40000^(1/159) ≈ 7 %, close enough for the Levenberg–Marquardt
// polish that follows to reach the global minimum; chosen by benchmark and
// by the shuffled-order and scipy agreement tests (see inversion_test.go).
const defaultGridSize = 160

// t1Grid is a log-spaced grid of T1 values T1_g and, for the sample times
// t_k of one protocol (sorted ascending), the table
//
//	e_gk = exp(−t_k/T1_g).
//
// For each row it keeps the inverse of the normal matrix of the linear model
// y ≈ a + b·e with all samples present, so that for T1 fixed the
// least-squares (a, b) and the cost follow in closed form: with
// Sy = Σy, Sye = Σy·e and Q = (XᵀX)⁻¹ of X = [1 e],
//
//	(a, b) = Q·(Sy, Sye),   RSS = Σy² − q,   q = (Sy, Sye)·Q·(Sy, Sye).
//
// This is the reduced-dimension search of Barral et al. 2010 (MRM 64:1057,
// "RD-NLS"): the model is linear in (a, b), so only T1 is searched.
type t1Grid struct {
	n   int
	t1  []float64 // grid values, ms, ascending
	e   []float64 // len(t1)·n, row-major
	se  []float64 // Σ_k e_gk
	see []float64 // Σ_k e_gk²
	q   []float64 // 3 per row: Q11, Q12, Q22
	ok  []bool    // false where XᵀX is (nearly) singular
}

// newT1Grid makes a grid of size values log-spaced from lo to hi (ms) for
// the sample times t.
func newT1Grid(t []float64, lo, hi float64, size int) *t1Grid {
	if size < 2 {
		size = 2
	}
	n := len(t)
	g := &t1Grid{
		n:  n,
		t1: make([]float64, size), e: make([]float64, size*n),
		se: make([]float64, size), see: make([]float64, size),
		q: make([]float64, 3*size), ok: make([]bool, size),
	}
	step := math.Log(hi/lo) / float64(size-1)
	for i := range g.t1 {
		t1 := lo * math.Exp(step*float64(i))
		g.t1[i] = t1
		row := g.e[i*n : i*n+n]
		var se, see float64
		for k, tk := range t {
			e := math.Exp(-tk / t1)
			row[k] = e
			se += e
			see += e * e
		}
		g.se[i], g.see[i] = se, see
		g.q[3*i], g.q[3*i+1], g.q[3*i+2], g.ok[i] = inv2(float64(n), se, see)
	}
	return g
}

// recoveryTimes checks the varying time of a recovery protocol (TI for
// inversion recovery, TR for saturation recovery), which must be given,
// finite and non-negative for every volume and distinct, and returns the
// permutation that sorts the volumes by it and the sorted times. what names
// the time in errors ("inversion time"); get reads it.
func recoveryTimes(acq []volume.Acquisition, min int, what string, get func(volume.Acquisition) float64) (perm []int, sorted []float64, err error) {
	if len(acq) < min {
		return nil, nil, protocolErr("%d volumes; the model needs at least %d %ss", len(acq), min, what)
	}
	t := make([]float64, len(acq))
	for i, a := range acq {
		v := get(a)
		if !finite(v) || v < 0 {
			return nil, nil, protocolErr("%s of volume %d is missing or invalid", what, i+1)
		}
		t[i] = v
	}
	perm = make([]int, len(t))
	for i := range perm {
		perm[i] = i
	}
	sort.SliceStable(perm, func(i, j int) bool { return t[perm[i]] < t[perm[j]] })
	sorted = make([]float64, len(t))
	for k, i := range perm {
		sorted[k] = t[i]
	}
	for k := 1; k < len(sorted); k++ {
		if sorted[k] == sorted[k-1] {
			return nil, nil, protocolErr("%s %g ms appears twice (volumes %d and %d)", what, sorted[k], perm[k-1]+1, perm[k]+1)
		}
	}
	return perm, sorted, nil
}

// t1Bounds returns the plausible T1 range of the T1 models: MinT and MaxT
// with defaults 1 and 10000 ms.
func t1Bounds(minT, maxT float64) (lo, hi float64) {
	lo, hi = minT, maxT
	if !(lo > 0) {
		lo = 1
	}
	if !(hi > 0) {
		hi = 10000
	}
	return lo, hi
}

// lmByCount makes one dense solver workspace per possible number of finite
// samples (min…n), so a voxel with dropped samples is fitted without
// allocating. Index by the count.
func lmByCount(set LM, min, n, p int) []*lm {
	s := make([]*lm, n+1)
	for k := min; k <= n; k++ {
		s[k] = newLM(set, k, p)
	}
	return s
}
