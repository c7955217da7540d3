package fit

import (
	"context"
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"github.com/tauvox/tauvox/io/volume"
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
	if nt > 64 {
		return nil, fmt.Errorf("%w: %d volumes; at most 64 are supported", ErrProtocol, nt)
	}
	// Validate the protocol once, before starting workers.
	if _, err := m.NewFitter(im.Acq); err != nil {
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
	outs := m.Outputs()
	maps := &Maps{Outputs: outs, Threshold: thr}
	maps.Values = make([][]float32, len(outs))
	maps.SE = make([][]float32, len(outs))
	for k := range outs {
		maps.Values[k] = make([]float32, nv)
		maps.SE[k] = make([]float32, nv)
	}
	maps.R2 = make([]float32, nv)
	maps.Status = make([]uint8, nv)

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
	case bad == 0:
		wk.fitter.Fit(res, wk.y, wk.cov(v))
	default:
		wk.fitSubset(v, bad)
	}
	wk.store(v, maps)
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
