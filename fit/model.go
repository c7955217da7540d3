package fit

import (
	"math"

	"github.com/tauvox/tauvox/volume"
)

// Param describes one output of a model: a fitted parameter or a quantity
// derived from one (R2 from T2, say).
type Param struct {
	Name string // quantity, e.g. "T2"
	Unit string // unit, e.g. "ms", "1/s", "arbitrary"
	Map  string // file stem of its map, BIDS suffix where one exists, e.g. "T2map"
	Desc string // one-line description for sidecars and help
}

// Model is one signal equation with one estimation method.
type Model interface {
	// Name returns the model's command-line name, e.g. "t2".
	Name() string
	// Method returns the estimation method's name, e.g. "nlls".
	Method() string
	// Outputs lists the values each voxel yields, in Result order.
	Outputs() []Param
	// MinPoints returns the fewest valid samples a voxel needs.
	MinPoints() int
	// NewFitter validates the protocol (one Acquisition per volume, in
	// volume order) and returns a workspace that fits voxels measured with
	// it. The error names the problem, e.g. a missing echo time.
	NewFitter(acq []volume.Acquisition) (Fitter, error)
}

// Fitter fits one voxel at a time for a fixed protocol. It is not safe for
// concurrent use and allocates nothing per call.
type Fitter interface {
	// Fit fits the samples y (one per volume of the protocol) and writes
	// every field of dst. dst.Values and dst.SE must have len(Outputs()).
	Fit(dst *Result, y []float64, c Covariates)
}

// Covariates carries per-voxel inputs other than the samples.
type Covariates struct {
	// B1 is the relative transmit field (actual/nominal flip angle). Zero
	// or NaN means unknown and is treated as 1.
	B1 float64
}

// b1 returns the usable B1 scale.
func (c Covariates) b1() float64 {
	if c.B1 > 0 && !math.IsInf(c.B1, 0) {
		return c.B1
	}
	return 1
}

// Result is the outcome of fitting one voxel.
type Result struct {
	Values []float64 // one per Outputs(), NaN on failure
	SE     []float64 // standard errors, NaN where unknown
	R2     float64   // coefficient of determination, NaN on failure
	Status Status
	RSS    float64 // residual sum of squares at the solution
	Iter   int     // solver iterations (0 for closed forms)
}

// NewResult allocates a Result for m.
func NewResult(m Model) *Result {
	n := len(m.Outputs())
	return &Result{Values: make([]float64, n), SE: make([]float64, n)}
}

// fail marks dst failed with status s: every value NaN.
func (dst *Result) fail(s Status) {
	nan := math.NaN()
	for i := range dst.Values {
		dst.Values[i] = nan
		dst.SE[i] = nan
	}
	dst.R2 = nan
	dst.RSS = nan
	dst.Iter = 0
	dst.Status = s
}

// rsquared returns 1 − rss/TSS of y, NaN when y is constant. TSS comes
// from one pass over the samples shifted by the first one (so the moments
// do not cancel for a large mean).
func rsquared(y []float64, rss float64) float64 {
	var s, s2 float64
	y0 := y[0]
	for _, v := range y {
		d := v - y0
		s += d
		s2 += d * d
	}
	tss := s2 - s*s/float64(len(y))
	if !(tss > 0) {
		return math.NaN()
	}
	return 1 - rss/tss
}
