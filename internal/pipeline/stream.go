package pipeline

import (
	"context"
	"fmt"
	"os"
	"runtime"
	"runtime/debug"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// slabSource is a series opened for reading by slabs (a NIfTI file or a
// DICOM series or protocol), with its protocol.
type slabSource struct {
	read   func(dst []float32, z0, z1 int, vols []int) error
	close  func() error
	nii    *nifti.SlabReader // the NIfTI reader, nil for DICOM
	dims   [4]int
	affine volume.Affine
	vols   []int // volumes fitted (after --skip-echoes), in file order
	acq    []volume.Acquisition
	src    volume.Source
	inputs []series.Input
}

// openSlabSource opens the series of c without reading its samples: a
// NIfTI file (the header, the sidecar beside it and the command-line
// lists, as series.Load does), or a DICOM folder or file (scanned once;
// the series or protocol series.Load would choose).
func openSlabSource(c *Config, tmpDir string) (*slabSource, error) {
	s := &slabSource{}
	ov := &series.Overrides{TE: c.Overrides.TE, TI: c.Overrides.TI, TR: c.Overrides.TR, FA: c.Overrides.FA}
	if st, err := os.Stat(c.Series); err == nil && (st.IsDir() || !series.IsNIfTI(c.Series)) {
		o := c.Overrides
		if info, ok := fit.Lookup(c.Spec.Model); ok && o.Needs == "" {
			o.Needs = info.Needs // a folder with several protocols: the one this model fits
		}
		r, inputs, err := series.OpenDICOM(c.Series, &o)
		if err != nil {
			return nil, err
		}
		r.Workers = c.Workers
		s.read, s.close = r.ReadSlab, func() error { return nil }
		s.dims, s.affine, s.src, s.inputs, s.acq = r.Dims(), r.Affine(), r.Source(), inputs, r.Acq()
		if err := series.Apply(s.acq, ov, c.Series); err != nil {
			return nil, err
		}
	} else {
		if c.Overrides.Series != "" {
			return nil, fmt.Errorf("%s: --series applies to DICOM folders, not to a NIfTI file", c.Series)
		}
		r, err := nifti.OpenSlabs(c.Series, &nifti.SlabOptions{TempDir: tmpDir})
		if err != nil {
			return nil, err
		}
		s.nii, s.read, s.close = r, r.ReadSlab, r.Close
		s.dims, s.affine, s.src = r.Dims(), r.Affine(), r.Source()
		if s.acq, s.inputs, err = series.NIfTIProtocol(c.Series, s.dims[3], &s.src, ov); err != nil {
			r.Close()
			return nil, err
		}
	}
	c.Overrides.Notices = append(c.Overrides.Notices, ov.Notices...)
	nt := s.dims[3]
	fail := func(err error) (*slabSource, error) {
		s.close()
		return nil, err
	}
	if nt < 2 {
		return fail(c.errorf("holds %d volume; a relaxation fit needs a 4-D series", nt))
	}
	s.vols = make([]int, nt)
	for i := range s.vols {
		s.vols[i] = i
	}
	if c.SkipEchoes != 0 {
		var err error
		if s.vols, s.acq, err = series.KeepVolumes(s.acq, c.SkipEchoes); err != nil {
			return fail(c.errorf("--skip-echoes: %v", err))
		}
	}
	return s, nil
}

// runSlabs fits a series from files (NIfTI or DICOM) slab by slab within the --memory budget:
// a first pass over the slabs finds the automatic threshold (and the noise
// level for --noise rician without --sigma) when the series holds more
// than one slab; the second reads, fits and appends each slab to the maps.
// The maps are bit-identical to fitting the whole series at once.
func runSlabs(ctx context.Context, c *Config, progress Progress) (sum *Summary, err error) {
	t0 := time.Now()
	sigma := c.Spec.Sigma
	if c.Rician && sigma == 0 {
		sigma = 1 // placeholder for the checks below; estimated later
	}
	model, err := c.model(sigma)
	if err != nil {
		return nil, err
	}
	st, err := newStage(c.Out, c.Force, c.ForceAll)
	if err != nil {
		return nil, err
	}
	defer st.Abort()
	tmpDir := st.Path("")
	src, err := openSlabSource(c, tmpDir)
	if err != nil {
		return nil, err
	}
	notes := append(append([]string(nil), c.Overrides.Notices...), st.Notes()...)
	defer src.close()
	if _, err := model.NewFitter(src.acq); err != nil {
		return nil, c.protocolError(model, err)
	}
	dims := src.dims
	affine := src.affine
	nx, ny, nz := dims[0], dims[1], dims[2]
	plane := nx * ny
	nvol := len(src.vols)
	inputs := src.inputs
	var mask, b1 *auxSlabs
	if c.Mask != "" {
		if mask, err = openAux(c.Mask, dims, affine, "mask", tmpDir); err != nil {
			return nil, err
		}
		defer mask.r.Close()
		inputs = append(inputs, series.Input{Path: c.Mask, Role: "mask"})
	}
	if c.B1 != "" {
		if b1, err = openAux(c.B1, dims, affine, "B1 map", tmpDir); err != nil {
			return nil, err
		}
		defer b1.r.Close()
		inputs = append(inputs, series.Input{Path: c.B1, Role: "b1"})
	}

	per := fit.SlabBytesPerSlice(nx, ny, nvol, len(model.Outputs()))
	if mask != nil {
		per += int64(plane) * 5
	}
	if b1 != nil {
		per += int64(plane) * 8
	}
	plan := fit.PlanSlabs(nz, per, c.memory())
	// With more than one slab, the next slab is read while one is fitted:
	// two sample buffers, so each slice costs its samples twice.
	prefetch := len(plan.Slabs) > 2
	if prefetch {
		plan = fit.PlanSlabs(nz, per+4*int64(plane)*int64(nvol), c.memory())
	}
	// The slab buffers are allocated once and reused; a soft limit on the
	// heap keeps the collector from letting the little garbage of each
	// slab (worker buffers, compressor state) double the heap before it
	// runs (the default GOGC=100 target is twice the live heap).
	lim := c.memory() + c.memory()/4 + 256<<20
	if lim > 0 {
		defer debug.SetMemoryLimit(debug.SetMemoryLimit(lim))
	}
	nslab := len(plan.Slabs) - 1
	defer enterRun(nslab == 1 && lim > 0)()
	if mask != nil {
		pos, _, err := mask.survey(plan, plane)
		if err != nil {
			return nil, err
		}
		if pos == 0 {
			return nil, fmt.Errorf("%s: mask selects no voxel", c.Mask)
		}
	}
	if b1 != nil {
		pos, small, err := b1.survey(plan, plane)
		if err != nil {
			return nil, err
		}
		if pos == 0 {
			return nil, fmt.Errorf("%s: B1 map holds no positive value", c.B1)
		}
		// sorted positive values p: p[pos/2] > 10 exactly when at most
		// pos/2 of them are ≤ 10.
		if small <= pos/2 {
			b1.scale = 0.01
		}
	}
	sums := mapset.StartChecksums(inputs) // while the series is read
	bufs := [][]float32{make([]float32, plan.Slices*plane*nvol)}
	if prefetch {
		bufs = append(bufs, make([]float32, plan.Slices*plane*nvol))
	}
	// slab reads slab i into buffer i mod 2 (with prefetch), so that slab
	// i+1 can be read while slab i is fitted.
	slab := func(i int) (*volume.Image, error) {
		z0, z1 := plan.Slabs[i], plan.Slabs[i+1]
		n := (z1 - z0) * plane
		buf := bufs[i%len(bufs)]
		im := &volume.Image{Dims: [4]int{nx, ny, z1 - z0, nvol}, Data: buf[:n*nvol], Affine: affine, Acq: src.acq, Source: src.src}
		return im, src.read(im.Data, z0, z1, src.vols)
	}
	type fetched struct {
		im  *volume.Image
		err error
	}
	var pending chan fetched // the slab being read ahead
	fetch := func(i int) chan fetched {
		ch := make(chan fetched, 1)
		go func() {
			im, err := slab(i)
			ch <- fetched{im, err}
		}()
		return ch
	}
	defer func() {
		if pending != nil {
			<-pending // no read into a buffer after the run returns
		}
	}()
	tLoad := time.Since(t0)

	// Pass 1: threshold and noise level over the whole series.
	t1 := time.Now()
	auto := c.auto()
	var am fit.AutoMask
	needSigma := c.Rician && c.Spec.Sigma == 0
	thr := c.Threshold
	var first *volume.Image // the one slab, when the series is a single slab
	var peaks []float32     // each voxel's largest sample, of the one slab
	if nslab == 1 {
		// The peaks of the automatic threshold are taken volume by volume
		// while the rest of the series is still being read.
		if auto {
			peaks = make([]float32, plane*nz)
		}
		if src.nii != nil {
			if auto {
				// The volumes come in order: the first sets the peaks
				// (writing 6 MB of −Inf first held up the read's start by
				// 4–6 ms on the 47 MB series of docs/benchmarks.md).
				src.nii.VolumeDone = func(i int, vol []float32) {
					if i == 0 {
						fit.StartPeaksHalves(peaks, vol)
					} else {
						fit.MaxIntoHalves(peaks, vol)
					}
				}
			}
			// A .nii.gz read whole may decode its second half on another
			// CPU, within what the slab plan leaves of the memory budget.
			src.nii.SplitMemory = max(c.memory()-per*int64(nz), 0)
		}
		first, err = slab(0)
		if src.nii != nil {
			src.nii.VolumeDone, src.nii.SplitMemory = nil, 0
		}
		if err != nil {
			return nil, err
		}
		if auto {
			if src.nii == nil {
				fit.ResetPeaks(peaks)
				for t := range nvol {
					fit.MaxInto(peaks, first.Volume(t))
				}
			}
			am = fit.PeaksMask(peaks, nvol)
			thr = am.Threshold
		}
	} else if auto {
		if am, err = streamThreshold(ctx, nslab, slab, tmpDir); err != nil {
			return nil, err
		}
		thr = am.Threshold
	}
	if needSigma {
		sthr := c.Threshold
		if sthr <= 0 {
			sthr = thr
			if !auto {
				// As the in-memory path: the air is judged by the automatic
				// threshold even when a mask or --no-mask decides the fit.
				if nslab == 1 {
					sthr = fit.AutoThreshold(first)
				} else {
					m, err := streamThreshold(ctx, nslab, slab, tmpDir)
					if err != nil {
						return nil, err
					}
					sthr = m.Threshold
				}
			}
		}
		var bg fit.Background
		for i := 0; i < nslab; i++ {
			im := first
			if im == nil {
				if im, err = slab(i); err != nil {
					return nil, err
				}
			}
			bg.Add(im, sthr)
		}
		s, ok := bg.Sigma()
		if !ok {
			return nil, fmt.Errorf("%s: too little air to estimate the noise; give --sigma", c.Series)
		}
		sigma = s
		if model, err = c.model(sigma); err != nil {
			return nil, err
		}
	}
	tSurvey := time.Since(t1)

	// Pass 2: fit and write slab by slab.
	settings := c.Settings(model, sigma)
	settings["memory_bytes"], settings["slabs"], settings["slices_per_slab"] = c.memory(), nslab, plan.Slices
	timings := map[string]float64{}
	info := &mapset.Info{Model: model.Name(), Method: model.Method(), Version: c.Version, Settings: settings, StatusNames: statusNames(),
		Inputs: inputs, Source: src.src, Acq: src.acq, Timings: timings, Sums: sums, AutoMask: c.autoRecord(am)}
	w, err := mapset.NewWriter(st, outputs(model), [3]int{nx, ny, nz}, affine, info)
	if err != nil {
		return nil, err
	}
	defer func() {
		if err != nil {
			w.Abort()
		}
	}()
	// The peaks of the one slab let the fit mask the air without reading
	// its samples.
	opt := &fit.Options{Workers: c.Workers, Threshold: thr, NoThreshold: thr <= 0, Peaks: peaks}
	offset := 0
	if progress != nil {
		opt.Progress = func(done int) { progress(offset+done, plane*nz) }
	}
	var maps *fit.Maps
	var drawn func() error // waits for the previews, once started
	defer func() {
		if drawn != nil && err != nil {
			drawn() // no goroutine writes into the stage once it is removed
		}
	}()
	var tRead, tFit, tWrite time.Duration
	var counts [fit.NumStatus]int
	var maskBuf []bool
	for i := 0; i < nslab; i++ {
		z0, z1 := plan.Slabs[i], plan.Slabs[i+1]
		tr := time.Now()
		im := first
		switch {
		case im != nil:
		case prefetch:
			if pending == nil {
				pending = fetch(i)
			}
			r := <-pending
			pending = nil
			if r.err != nil {
				return nil, r.err
			}
			im = r.im
			if i+1 < nslab {
				pending = fetch(i + 1) // read ahead while this slab is fitted
			}
		default:
			if im, err = slab(i); err != nil {
				return nil, err
			}
		}
		opt.Mask, opt.B1 = nil, nil
		if mask != nil {
			m, err := mask.read(z0, z1, plane)
			if err != nil {
				return nil, err
			}
			if cap(maskBuf) < len(m) {
				maskBuf = make([]bool, len(m))
			}
			maskBuf = maskBuf[:len(m)]
			for v, x := range m {
				maskBuf[v] = x > 0
			}
			opt.Mask = maskBuf
		}
		if b1 != nil {
			if opt.B1, err = b1.read(z0, z1, plane); err != nil {
				return nil, err
			}
		}
		tRead += time.Since(tr)
		tf := time.Now()
		if maps, err = fit.RunTo(ctx, maps, im, model, opt); err != nil {
			return nil, err
		}
		tFit += time.Since(tf)
		offset += im.Voxels()
		if nslab == 1 {
			// The samples are not needed any more: collect them now, so that
			// the previews and the map files' compressors reuse their memory
			// instead of mapping in more (measured on the 47 MB series of
			// docs/benchmarks.md: 38,000 page faults instead of 50,000).
			im, first, bufs, opt.Peaks, peaks = nil, nil, nil, nil, nil
			runtime.GC()
			// The previews are drawn from the maps in memory while the map
			// files are compressed and written.
			drawn = c.previews(ctx, st, model.Outputs(), wholeMaps(maps, [4]int{nx, ny, nz, 1}, affine))
		}
		for s, n := range maps.Counts {
			counts[s] += n
		}
		tw := time.Now()
		maps.Threshold = thr
		if err = w.Append(toSlab(maps)); err != nil {
			return nil, err
		}
		tWrite += time.Since(tw)
		first = nil
	}
	// Temporary uncompressed copies live in the stage: remove them before
	// the folder is committed.
	if err = src.close(); err != nil {
		return nil, err
	}
	for _, r := range []*nifti.SlabReader{auxReader(mask), auxReader(b1)} {
		if r != nil {
			if err = r.Close(); err != nil {
				return nil, err
			}
		}
	}
	if nslab > 1 {
		// The slab buffers (up to --memory) are not needed any more: let
		// the previews, which read the maps back, reuse their memory.
		bufs, maps = nil, nil
		runtime.GC()
	}
	tc := time.Now()
	timings["load"] = tLoad.Seconds()
	timings["survey"] = tSurvey.Seconds()
	timings["read"] = tRead.Seconds()
	timings["fit"] = tFit.Seconds()
	timings["write"] = tWrite.Seconds()
	if _, err = w.Close(); err != nil {
		return nil, err
	}
	if drawn == nil { // several slabs: drawn from the finished files
		drawn = c.previews(ctx, st, model.Outputs(), nil)
	}
	err = drawn()
	drawn = nil
	if err != nil {
		return nil, err
	}
	if err = st.Commit(); err != nil {
		return nil, err
	}
	return &Summary{Notes: notes, Model: model.Name(), Method: model.Method(), Voxels: plane * nz, Counts: counts,
		Workers: c.workers(), Slabs: nslab, BySlab: true, Fit: tFit, Write: tWrite + time.Since(tc), Sigma: sigma}, nil
}

func auxReader(x *auxSlabs) *nifti.SlabReader {
	if x == nil {
		return nil
	}
	return x.r
}
