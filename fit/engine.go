package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"github.com/tauvox/tauvox/internal/halves"
	"github.com/tauvox/tauvox/internal/threshold"

	"github.com/tauvox/tauvox/volume"
)

// Options controls Run. The zero value fits every voxel above the
// automatic threshold with one worker per CPU.
type Options struct {
	// Workers is the number of goroutines; 0 means runtime.NumCPU().
	Workers int
	// Mask, when not nil, selects the voxels to fit (len = voxels of one
	// volume); the automatic threshold is then not applied, but Threshold
	// still is when it is positive.
	Mask []bool
	// Threshold, when positive, masks voxels whose largest finite sample
	// is below it. When zero and Mask is nil, the automatic threshold
	// applies (see AutoThreshold).
	Threshold float64
	// NoThreshold disables the automatic threshold: every voxel is fitted.
	NoThreshold bool
	// B1 holds an optional relative transmit-field map (len = voxels).
	B1 []float32
	// Peaks, when not nil, holds each voxel's largest finite sample, as
	// MaxInto takes it from ResetPeaks (−Inf when none is finite; len =
	// voxels), known already from the threshold's survey. Without a Mask,
	// a voxel whose peak is finite and below the threshold is then masked
	// without its samples being read: the same outcome, less work for the
	// air around an object (a third of the voxels of docs/benchmarks.md's
	// series).
	Peaks []float32
	// Progress, when not nil, is called with the number of voxels done so
	// far. It is called from the worker goroutines, never concurrently.
	Progress func(done int)
}

// Maps is the result of Run: one map per model output plus its standard
// error, the fit quality and the status, each with one entry per voxel.
type Maps struct {
	Outputs   []Param
	Values    [][]float32 // [output][voxel], NaN where not fitted
	SE        [][]float32 // [output][voxel]
	R2        []float32   // coefficient of determination
	Status    []uint8     // Status codes
	Counts    [NumStatus]int
	Threshold float64 // the threshold applied (0 when none)
}

// chunk is the number of voxels a worker takes at a time.
const chunk = 2048

// maxSubsetFitters bounds the per-worker cache of fitters made for voxels
// with missing samples.
const maxSubsetFitters = 32

// Run fits model m to every voxel of im and returns the maps. The protocol
// is im.Acq. It returns an error for a protocol the model cannot use, a
// mask or B1 map of the wrong size, or a cancelled context; a voxel that
// cannot be fitted is never an error. The maps do not depend on
// opt.Workers.
func Run(ctx context.Context, im *volume.Image, m Model, opt *Options) (*Maps, error) {
	return RunTo(ctx, nil, im, m, opt)
}

// RunTo is Run writing into dst, whose slices are reused when long enough
// (nil dst allocates, as Run does). It returns dst. Fitting a series slab
// by slab (ranges of slices, see SlabPlan) with RunTo and the threshold of
// the whole series (PeakHistogram) gives the same values, bit for bit, as
// one Run over the whole series: a voxel's fit depends only on its own
// samples, the threshold and its mask and B1 entries.
func RunTo(ctx context.Context, dst *Maps, im *volume.Image, m Model, opt *Options) (*Maps, error) {
	if opt == nil {
		opt = &Options{}
	}
	if err := im.Validate(); err != nil {
		return nil, err
	}
	if len(im.Acq) != im.Volumes() {
		return nil, fmt.Errorf("%w: %d volumes but %d acquisition entries", ErrProtocol, im.Volumes(), len(im.Acq))
	}
	nv, nt := im.Voxels(), im.Volumes()
	if opt.Mask != nil && len(opt.Mask) != nv {
		return nil, fmt.Errorf("fit: mask has %d voxels, the series %d", len(opt.Mask), nv)
	}
	if opt.B1 != nil && len(opt.B1) != nv {
		return nil, fmt.Errorf("fit: B1 map has %d voxels, the series %d", len(opt.B1), nv)
	}
	if opt.Peaks != nil && len(opt.Peaks) != nv {
		return nil, fmt.Errorf("fit: peaks of %d voxels, the series %d", len(opt.Peaks), nv)
	}
	if nt > 64 {
		return nil, fmt.Errorf("%w: %d volumes; at most 64 are supported", ErrProtocol, nt)
	}
	// Validate the protocol once, before starting workers.
	if _, err := m.NewFitter(im.Acq); err != nil {
		return nil, err
	}
	if err := CheckWorkers(opt.Workers); err != nil {
		return nil, err
	}
	workers := opt.Workers
	if workers <= 0 {
		workers = runtime.NumCPU()
	}

	thr := opt.Threshold
	if thr <= 0 && opt.Mask == nil && !opt.NoThreshold {
		thr = AutoThreshold(im)
	}
	maps := dst.reset(m.Outputs(), nv)
	maps.Threshold = thr

	var next, done atomic.Int64
	var progMu sync.Mutex
	var wg sync.WaitGroup
	errs := make([]error, workers)
	wks := make([]*worker, workers)
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			wk, err := newWorker(m, im, opt, thr)
			if err != nil {
				errs[w] = err
				return
			}
			wks[w] = wk
			for {
				if ctx.Err() != nil {
					errs[w] = ctx.Err()
					return
				}
				lo := int(next.Add(chunk)) - chunk
				if lo >= nv {
					break
				}
				hi := min(lo+chunk, nv)
				wk.load(lo, hi)
				for v := lo; v < hi; v++ {
					wk.voxel(v, maps)
				}
				d := done.Add(int64(hi - lo))
				if opt.Progress != nil {
					progMu.Lock()
					opt.Progress(int(d))
					progMu.Unlock()
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
	for _, wk := range wks {
		for s, c := range wk.counts {
			maps.Counts[s] += c
		}
	}
	return maps, nil
}

// worker is one goroutine's workspace.
type worker struct {
	m       Model
	im      *volume.Image
	opt     *Options
	thr     float64
	nv, nt  int
	fitter  Fitter
	res     *Result
	y       []float64
	sub     []float64
	subsets map[uint64]Fitter
	subAcq  []volume.Acquisition
	min     int
	counts  [NumStatus]int
	// slab holds the samples of the current chunk, volume by volume
	// (slab[t*chunk + v−lo]): copied with sequential reads so the voxel
	// loop does not stride across the whole series.
	slab []float32
	lo   int
}

func newWorker(m Model, im *volume.Image, opt *Options, thr float64) (*worker, error) {
	f, err := m.NewFitter(im.Acq)
	if err != nil {
		return nil, err
	}
	nt := im.Volumes()
	return &worker{
		m: m, im: im, opt: opt, thr: thr, nv: im.Voxels(), nt: nt,
		fitter: f, res: NewResult(m),
		y: make([]float64, nt), sub: make([]float64, nt),
		subsets: make(map[uint64]Fitter),
		min:     m.MinPoints(),
		slab:    make([]float32, nt*chunk),
	}, nil
}

// WorkersPerCPU bounds the worker count: each worker holds its own
// workspace and slab (tens of KiB to a few MiB), and more workers than a
// small multiple of the CPUs only add memory and switching, never speed
// (the engine is CPU-bound).
const WorkersPerCPU = 16

// CheckWorkers accepts a worker count of 0 (one per CPU) up to
// WorkersPerCPU per CPU, and refuses anything else in one line.
func CheckWorkers(n int) error {
	if n < 0 {
		return errors.New("--workers must be positive")
	}
	if lim := WorkersPerCPU * runtime.NumCPU(); n > lim {
		return fmt.Errorf("--workers %d is above the limit of %d (%d per CPU on this machine's %d CPUs)", n, lim, WorkersPerCPU, runtime.NumCPU())
	}
	return nil
}

// load copies the samples of voxels lo…hi−1 into the slab.
func (wk *worker) load(lo, hi int) {
	wk.lo = lo
	for t := 0; t < wk.nt; t++ {
		copy(wk.slab[t*chunk:t*chunk+hi-lo], wk.im.Data[t*wk.nv+lo:t*wk.nv+hi])
	}
}

// voxel fits voxel v (inside the loaded chunk) and stores the outcome in
// maps.
func (wk *worker) voxel(v int, maps *Maps) {
	if p := wk.opt.Peaks; p != nil && wk.opt.Mask == nil && wk.thr > 0 {
		// As the case below: some sample is finite (the peak is) and the
		// largest is below the threshold.
		if pk := float64(p[v]); pk > math.Inf(-1) && !(pk >= wk.thr) {
			wk.res.fail(Masked)
			wk.store(v, maps)
			return
		}
	}
	slab := wk.slab[v-wk.lo:]
	var bad uint64
	peak := math.Inf(-1)
	for t := 0; t < wk.nt; t++ {
		s := float64(slab[t*chunk])
		wk.y[t] = s
		if math.IsNaN(s) || math.IsInf(s, 0) {
			bad |= 1 << uint(t)
			continue
		}
		if s > peak {
			peak = s
		}
	}
	res := wk.res
	switch {
	case wk.opt.Mask != nil && !wk.opt.Mask[v]:
		res.fail(Masked)
	case wk.thr > 0 && !(peak >= wk.thr) && bad != (1<<uint(wk.nt))-1:
		res.fail(Masked)
	case bad != (1<<uint(wk.nt))-1 && !wk.signal(bad):
		res.fail(NoSignal)
	case wk.opt.B1 != nil && !(wk.opt.B1[v] >= MinB1 && wk.opt.B1[v] <= MaxB1):
		res.fail(BadB1)
	case bad == 0:
		wk.fitter.Fit(res, wk.y, wk.cov(v))
	default:
		wk.fitSubset(v, bad)
	}
	wk.store(v, maps)
}

// signal reports whether some finite sample of the voxel in wk.y (bad
// marks the non-finite ones) differs from zero.
func (wk *worker) signal(bad uint64) bool {
	for t := 0; t < wk.nt; t++ {
		if bad&(1<<uint(t)) == 0 && wk.y[t] != 0 {
			return true
		}
	}
	return false
}

func (wk *worker) cov(v int) Covariates {
	if wk.opt.B1 == nil {
		return Covariates{}
	}
	return Covariates{B1: float64(wk.opt.B1[v])}
}

// fitSubset fits a voxel some of whose samples are not finite, with a
// fitter made for the remaining volumes (cached per pattern).
func (wk *worker) fitSubset(v int, bad uint64) {
	res := wk.res
	n := 0
	for t := 0; t < wk.nt; t++ {
		if bad&(1<<uint(t)) == 0 {
			wk.sub[n] = wk.y[t]
			n++
		}
	}
	if n < wk.min {
		res.fail(TooFewPoints)
		return
	}
	f, ok := wk.subsets[bad]
	if !ok {
		wk.subAcq = wk.subAcq[:0]
		for t := 0; t < wk.nt; t++ {
			if bad&(1<<uint(t)) == 0 {
				wk.subAcq = append(wk.subAcq, wk.im.Acq[t])
			}
		}
		var err error
		f, err = wk.m.NewFitter(wk.subAcq)
		if err != nil {
			f = nil
		}
		if len(wk.subsets) < maxSubsetFitters {
			wk.subsets[bad] = f
		}
	}
	if f == nil {
		res.fail(TooFewPoints)
		return
	}
	f.Fit(res, wk.sub[:n], wk.cov(v))
}

func (wk *worker) store(v int, maps *Maps) {
	res := wk.res
	for k := range maps.Values {
		maps.Values[k][v] = float32(res.Values[k])
		maps.SE[k][v] = float32(res.SE[k])
	}
	maps.R2[v] = float32(res.R2)
	maps.Status[v] = uint8(res.Status)
	wk.counts[res.Status]++
}

// reset sizes m (allocated when nil) for nv voxels and outs, reusing its
// slices when they are long enough, and clears the counts.
func (m *Maps) reset(outs []Param, nv int) *Maps {
	if m == nil {
		m = &Maps{}
	}
	// A large map is allocated on its own goroutine: make clears memory
	// the heap reuses, and the maps of a million voxels took 11 ms one
	// after another (docs/benchmarks.md's series), half that side by side.
	var wg sync.WaitGroup
	grow := func(s *[]float32) {
		switch {
		case cap(*s) >= nv:
			*s = (*s)[:nv]
		case nv < 1<<18:
			*s = make([]float32, nv)
		default:
			wg.Go(func() { *s = make([]float32, nv) })
		}
	}
	m.Outputs = outs
	if len(m.Values) != len(outs) {
		m.Values = make([][]float32, len(outs))
		m.SE = make([][]float32, len(outs))
	}
	for k := range outs {
		grow(&m.Values[k])
		grow(&m.SE[k])
	}
	grow(&m.R2)
	if cap(m.Status) < nv {
		m.Status = make([]uint8, nv)
	}
	m.Status = m.Status[:nv]
	wg.Wait()
	m.Counts = [NumStatus]int{}
	m.Threshold = 0
	return m
}

// SlabPlan divides the slices of a series into slabs whose samples and
// maps fit a memory budget. Slabs[i] is the first slice of slab i;
// Slabs[len−1] is Nz.
type SlabPlan struct {
	Slabs []int
	// Slices is the number of slices per slab (the last may hold fewer).
	Slices int
}

// SlabBytesPerSlice returns the memory one slice costs while it is fitted:
// its nt float32 samples, the float32 value and standard-error maps of
// nout outputs, R², the status byte, the status as float32 for writing and
// the per-voxel peak of the threshold pass (4·nt + 8·nout + 13 bytes per
// voxel). The workers' own buffers are bounded and not counted.
func SlabBytesPerSlice(nx, ny, nt, nout int) int64 {
	return int64(nx) * int64(ny) * int64(4*nt+8*nout+13)
}

// PlanSlabs returns the slabs of nz slices of perSlice bytes each within
// budget bytes (at least one slice per slab, however small the budget).
func PlanSlabs(nz int, perSlice, budget int64) SlabPlan {
	k := 1
	if perSlice > 0 && budget > perSlice {
		k = int(min(budget/perSlice, int64(nz)))
	}
	// Even slabs: the same number of slabs with sizes as equal as possible.
	n := (nz + k - 1) / k
	k = (nz + n - 1) / n
	p := SlabPlan{Slices: k}
	for z := 0; z < nz; z += k {
		p.Slabs = append(p.Slabs, z)
	}
	p.Slabs = append(p.Slabs, nz)
	return p
}

// PeakHistogram computes AutoThreshold of a series seen in parts: the
// largest finite sample of every voxel is found part by part (Peaks),
// then binned once the largest over the series (the top of the histogram)
// is known. The result equals AutoThreshold of the whole series exactly.
// The zero value is ready for Peaks.
type PeakHistogram struct {
	h    threshold.Histogram
	fine fineHist
	// Volumes is the number of volumes of the series (set by Peaks; set it
	// when the peaks come from ResetPeaks and MaxInto).
	Volumes int
}

// Peaks writes into dst (allocated when nil or short; returned) the
// largest finite sample of each voxel of im, −Inf when it has none, as
// AutoThreshold computes them, and raises the histogram's top to the
// largest peak.
func (p *PeakHistogram) Peaks(dst []float32, im *volume.Image) []float32 {
	nv, nt := im.Voxels(), im.Volumes()
	if cap(dst) < nv {
		dst = make([]float32, nv)
	}
	dst = ResetPeaks(dst[:nv])
	p.Volumes = nt
	for t := 0; t < nt; t++ {
		MaxInto(dst, im.Data[t*nv:(t+1)*nv])
	}
	p.Raise(dst)
	return dst
}

// ResetPeaks sets every peak to −Inf (no sample yet) and returns peaks.
func ResetPeaks(peaks []float32) []float32 {
	for v := range peaks {
		peaks[v] = float32(math.Inf(-1))
	}
	return peaks
}

// MaxInto raises each peak to the same voxel's sample of vol when that is
// larger and finite: the step Peaks takes for each volume, for a caller
// that receives the volumes one at a time. Start from ResetPeaks and
// finish with Raise.
func MaxInto(peaks, vol []float32) {
	vol = vol[:len(peaks)]
	for v, s := range vol {
		// s > peaks[v] rules out NaN and −Inf; the bound rules out +Inf.
		if s > peaks[v] && s <= math.MaxFloat32 {
			peaks[v] = s
		}
	}
}

// StartPeaks sets each peak to the same voxel's sample of vol when that
// is finite, else to −Inf: ResetPeaks and MaxInto in one pass, for the
// first volume of a series, so that the peaks of a fresh allocation are
// written once (its pages first touched beside the read that delivers
// the volume, not before it starts).
func StartPeaks(peaks, vol []float32) {
	vol = vol[:len(peaks)]
	for v, s := range vol {
		// As MaxInto from −Inf: s > −Inf rules out NaN and −Inf.
		if s > float32(math.Inf(-1)) && s <= math.MaxFloat32 {
			peaks[v] = s
		} else {
			peaks[v] = float32(math.Inf(-1))
		}
	}
}

// StartPeaksHalves is StartPeaks on the two halves of the voxels at once.
func StartPeaksHalves(peaks, vol []float32) {
	h := len(peaks) / 2
	halves.Both(func() { StartPeaks(peaks[:h], vol[:h]) }, func() { StartPeaks(peaks[h:], vol[h:len(peaks)]) })
}

// MaxIntoHalves is MaxInto on the two halves of the voxels at once (the
// peaks are each voxel's own). A split .nii.gz read reports the volumes of
// its second half together, one after another, when that half is joined:
// their peaks are then taken on two CPUs.
func MaxIntoHalves(peaks, vol []float32) {
	h := len(peaks) / 2
	halves.Both(func() { MaxInto(peaks[:h], vol[:h]) }, func() { MaxInto(peaks[h:], vol[h:len(peaks)]) })
}

// Raise raises the histogram's top to the largest of peaks.
func (p *PeakHistogram) Raise(peaks []float32) { p.h.Raise(peaks) }

// Top returns the largest peak seen so far (0 when none is positive).
func (p *PeakHistogram) Top() float64 { return p.h.Top }

// Add bins peaks found by Peaks; call it for every part after all parts
// have passed through Peaks.
func (p *PeakHistogram) Add(peaks []float32) {
	p.h.Add(peaks)
	p.fine.add(peaks, p.h.Top)
}

// Threshold returns the automatic threshold of the binned peaks, 0 when no
// sample is positive (as AutoThreshold).
func (p *PeakHistogram) Threshold() float64 { return p.Mask().Threshold }

// Mask returns the automatic mask of the binned peaks (as AutoMaskOf).
func (p *PeakHistogram) Mask() AutoMask {
	otsu := p.h.Otsu() / 2
	if !(otsu > 0) {
		return AutoMask{}
	}
	m, why := p.fine.noiseMask(otsu, p.Volumes)
	if why != "" {
		return AutoMask{Threshold: otsu, Rule: "otsu", Otsu: otsu, Why: why}
	}
	return m
}

// Background accumulates BackgroundSigma over a series seen in parts of
// whole voxels, in voxel order; the result equals BackgroundSigma of the
// whole series exactly (the sum runs in the same order). The zero value is
// ready.
type Background struct {
	sum float64
	n   int
}

// Add adds the air samples of im: every finite, positive sample of the
// voxels whose largest sample is below thr.
func (b *Background) Add(im *volume.Image, thr float64) {
	nv, nt := im.Voxels(), im.Volumes()
	for v := 0; v < nv; v++ {
		peak := math.Inf(-1)
		for t := 0; t < nt; t++ {
			if s := float64(im.Data[t*nv+v]); s > peak && !math.IsInf(s, 0) {
				peak = s
			}
		}
		if !(peak < thr) {
			continue
		}
		for t := 0; t < nt; t++ {
			s := float64(im.Data[t*nv+v])
			if s > 0 && !math.IsInf(s, 0) {
				b.sum += s
				b.n++
			}
		}
	}
}

// Sigma returns the estimate and false when fewer than 100 samples
// qualified, as BackgroundSigma.
func (b *Background) Sigma() (float64, bool) {
	if b.n < 100 {
		return 0, false
	}
	return b.sum / float64(b.n) / math.Sqrt(math.Pi/2), true
}
