package main

import (
	"bufio"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"runtime/debug"
	"runtime/pprof"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/io/volume"
)

const fitSummary = `Fits a relaxation model voxel by voxel and writes, into DIR, one NIfTI map
per output (T2map, R2map, M0map, T1map, ...), its standard error (<map>_sd),
fitquality (R²), status (0 ok, 1 masked, 2 too few points, 3 not converged,
4 out of bounds), a JSON sidecar per map and provenance.json. Failed voxels
are NaN, never 0. Times are in ms.

SERIES is a DICOM folder (searched recursively; --series ID picks one of
several, see tauvox scan) or file, or a 4-D NIfTI file (.nii, .nii.gz) whose
BIDS sidecar (same name, .json; times in seconds) gives the echo/inversion
times; --te/--ti/--tr/--fa (ms, degrees) as lists "10,20,30" or ranges
"10:10:320" replace them.

Models:
` + "%s" + `
Masking: a voxel is fitted when its largest sample reaches half of Otsu's
threshold of all voxels' largest samples (air is left out); --threshold sets
the level, --mask FILE gives a mask (non-zero = fit), --no-mask fits all.`

func modelList() string {
	var b strings.Builder
	for _, m := range fit.Models() {
		fmt.Fprintf(&b, "  %-7s %s\n          methods: %s (default %s); needs %s per volume\n", m.Name, m.Summary, strings.Join(m.Methods, ", "), m.Methods[0], m.Needs)
	}
	return b.String()
}

// listFlag is a flag holding a list of numbers.
type listFlag struct {
	vals []float64
	set  bool
}

func (l *listFlag) String() string { return "" }
func (l *listFlag) Set(s string) error {
	v, err := sidecar.ParseList(s)
	if err != nil {
		return err
	}
	l.vals, l.set = v, true
	return nil
}

func (l *listFlag) list() []float64 {
	if !l.set {
		return nil
	}
	return l.vals
}

type fitArgs struct {
	series, out, model, method, maskFile, b1File, noise, cpuprofile, seriesID string
	force, offset, efficiency, noMask, quiet, gonum, epgBasis                 bool
	threshold, sigma, minT, maxT, t1, refocus, window                         float64
	skip, workers                                                             int
	te, ti, tr, fa                                                            listFlag
	memory                                                                    byteFlag
	noPreview, keepIDs                                                        bool
	previewRange                                                              string
	display                                                                   preview.Window // previewRange parsed
}

func runFit(ctx context.Context, args []string, e *env) error {
	var a fitArgs
	fs := newFlags("fit", "SERIES --model M --out DIR [options]", fmt.Sprintf(fitSummary, modelList()), e)
	fs.StringVar(&a.model, "model", "", "signal model: t2, t2star, t1-ir, t1-vfa, t1-sr (required)")
	fs.StringVar(&a.method, "method", "", "estimation method (default: the model's first)")
	fs.StringVar(&a.out, "out", "", "output folder (required; refused if it exists, see --force)")
	fs.StringVar(&a.seriesID, "series", "", "DICOM series id when SERIES is a folder holding several (see tauvox scan)")
	fs.BoolVar(&a.force, "force", false, "replace an existing output folder")
	fs.StringVar(&a.maskFile, "mask", "", "NIfTI mask on the series grid; voxels > 0 are fitted")
	fs.Float64Var(&a.threshold, "threshold", 0, "fit voxels whose largest sample reaches this value (default automatic)")
	fs.BoolVar(&a.noMask, "no-mask", false, "fit every voxel (no automatic threshold)")
	fs.IntVar(&a.skip, "skip-echoes", 0, "leave out the N shortest echoes")
	fs.StringVar(&a.b1File, "b1", "", "relative B1 map for t1-vfa (ratio, or percent as in BIDS TB1map)")
	fs.IntVar(&a.workers, "workers", 0, "worker goroutines (default: one per CPU)")
	fs.Var(&a.te, "te", "echo times, ms (list or start:step:stop)")
	fs.Var(&a.ti, "ti", "inversion times, ms")
	fs.Var(&a.tr, "tr", "repetition times, ms")
	fs.Var(&a.fa, "fa", "flip angles, degrees")
	fs.BoolVar(&a.offset, "offset", false, "t2/t2star: fit a constant offset c (nlls)")
	fs.StringVar(&a.noise, "noise", "gaussian", "t2/t2star nlls: gaussian (plain least squares) or rician (fit the noise floor)")
	fs.Float64Var(&a.sigma, "sigma", 0, "noise SD for --noise rician (default: estimated from the air)")
	fs.BoolVar(&a.efficiency, "efficiency", false, "t1-sr: fit the saturation efficiency")
	fs.Float64Var(&a.minT, "min", 0, "lower bound of the time constant, ms (default per model)")
	fs.Float64Var(&a.maxT, "max", 0, "upper bound of the time constant, ms (default per model)")
	fs.Float64Var(&a.t1, "t1", 0, "t2-epg, t2-spectrum --epg-basis: the fixed T1, ms (default 1000)")
	fs.Float64Var(&a.refocus, "refocus", 0, "t2-epg: nominal refocusing angle, degrees (default 180)")
	fs.Float64Var(&a.window, "window", 0, "t2-spectrum: upper T2 of the short (myelin-water) window, ms (default 40)")
	fs.BoolVar(&a.epgBasis, "epg-basis", false, "t2-spectrum: EPG basis functions with a fitted refocusing angle")
	fs.BoolVar(&a.gonum, "gonum", false, "use gonum's optimiser for nonlinear fits (slow cross-check)")
	fs.BoolVar(&a.quiet, "quiet", false, "no progress bar or summary")
	fs.BoolVar(&a.keepIDs, "keep-identifiers", false, "copy the patient name, ID, birth date and accession number of a DICOM series into provenance.json (left out by default)")
	fs.BoolVar(&a.noPreview, "no-preview", false, "do not write the PNG previews of the maps")
	fs.StringVar(&a.previewRange, "range", "", "preview display window LO,HI in the map's unit (default 1st–99th percentile)")
	fs.StringVar(&a.cpuprofile, "cpuprofile", "", "write a CPU profile to this file")
	a.memory = byteFlag(defaultMemory)
	fs.Var(&a.memory, "memory", "memory budget for the slabs of a NIfTI series, bytes or with K, M, G (default 1G); larger series are read and fitted a range of slices at a time")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		if errors.Is(err, errHelp) && a.model != "" {
			for _, m := range fit.Models() {
				if m.Name == a.model {
					fmt.Fprintf(e.stdout, "\nModel %s: %s\nmethods: %s (default %s); needs %s per volume\n\n%s\n", m.Name, m.Summary,
						strings.Join(m.Methods, ", "), m.Methods[0], m.Needs, m.Help)
				}
			}
		}
		return err
	}
	switch {
	case len(pos) != 1:
		return fmt.Errorf("give exactly one SERIES (see --help)")
	case a.model == "":
		return fmt.Errorf("--model is required (see --help)")
	case a.out == "":
		return fmt.Errorf("--out is required (see --help)")
	case fit.CheckWorkers(a.workers) != nil:
		return fit.CheckWorkers(a.workers)
	case a.noise != "gaussian" && a.noise != "rician":
		return fmt.Errorf("--noise must be gaussian or rician")
	case a.sigma < 0 || math.IsNaN(a.sigma):
		return fmt.Errorf("--sigma must be positive")
	}
	if a.previewRange != "" {
		w, err := preview.ParseWindow(a.previewRange)
		if err != nil {
			return fmt.Errorf("--range: %v", err)
		}
		a.display = w
	}
	a.series = pos[0]
	if a.cpuprofile != "" {
		f, err := os.Create(a.cpuprofile)
		if err != nil {
			return err
		}
		defer f.Close()
		if err := pprof.StartCPUProfile(f); err != nil {
			return err
		}
		defer pprof.StopCPUProfile()
	}
	return fitSeries(ctx, &a, e)
}

// wholeMaps returns the parameter maps of a fit of a whole grid by stem,
// sharing maps' samples.
func wholeMaps(maps *fit.Maps, dims [4]int, affine volume.Affine) map[string]*volume.Image {
	out := map[string]*volume.Image{}
	for k, p := range maps.Outputs {
		out[p.Map] = &volume.Image{Dims: [4]int{dims[0], dims[1], dims[2], 1}, Data: maps.Values[k], Affine: affine}
	}
	return out
}

// inMemoryNIfTI makes fitSeries load NIfTI series whole, as DICOM series
// are (tests compare the two paths).
var inMemoryNIfTI = false

// previews writes the PNG previews into the stage unless --no-preview.
// It starts them and returns the function that waits for them: with the
// maps in memory (inMemory not nil) they are drawn while the caller
// writes the map files; otherwise the caller must start them after.
func (a *fitArgs) previews(ctx context.Context, st *mapset.Stage, outs []fit.Param, inMemory map[string]*volume.Image) (wait func() error) {
	if a.noPreview {
		return func() error { return nil }
	}
	done := make(chan error, 1)
	go func() { done <- fitPreviews(ctx, st.Path(""), outs, a.display, inMemory) }()
	return func() error { return <-done }
}

func fitSeries(ctx context.Context, a *fitArgs, e *env) error {
	if err := checkOutput(a.out, a.series, a.maskFile, a.b1File); err != nil {
		return err
	}
	if a.memory <= 0 {
		a.memory = defaultMemory
	}
	if st, err := os.Stat(a.series); err == nil && !st.IsDir() && series.IsNIfTI(a.series) && !inMemoryNIfTI {
		return fitStream(ctx, a, e)
	}
	return fitInMemory(ctx, a, e)
}

// fitInMemory loads the whole series (DICOM) and fits it in one go.
func fitInMemory(ctx context.Context, a *fitArgs, e *env) error {
	t0 := time.Now()
	im, inputs, err := series.Load(a.series, &series.Overrides{TE: a.te.list(), TI: a.ti.list(), TR: a.tr.list(), FA: a.fa.list(), Series: a.seriesID, KeepIdentifiers: a.keepIDs})
	if err != nil {
		return err
	}
	if im.Volumes() < 2 {
		return fmt.Errorf("%s: holds %d volume; a relaxation fit needs a 4-D series", a.series, im.Volumes())
	}
	if im, err = series.SkipEchoes(im, a.skip); err != nil {
		return fmt.Errorf("%s: --skip-echoes: %v", a.series, err)
	}
	spec := fit.Spec{Model: a.model, Method: a.method, Offset: a.offset, Efficiency: a.efficiency, MinT: a.minT, MaxT: a.maxT, Gonum: a.gonum,
		T1Fixed: a.t1, RefocusAngle: a.refocus, Window: a.window, EPGBasis: a.epgBasis}
	if a.sigma > 0 && a.noise != "rician" {
		return fmt.Errorf("--sigma needs --noise rician")
	}
	opt := &fit.Options{Workers: a.workers, Threshold: a.threshold, NoThreshold: a.noMask}
	if a.maskFile != "" {
		mask, err := readMask(a.maskFile, im)
		if err != nil {
			return err
		}
		opt.Mask = mask
	}
	if a.b1File != "" {
		if a.model != "t1-vfa" && a.model != "t2-epg" {
			return fmt.Errorf("--b1 applies to t1-vfa and t2-epg only")
		}
		b1, err := readB1(a.b1File, im)
		if err != nil {
			return err
		}
		opt.B1 = b1
	}
	if a.noise == "rician" {
		spec.Sigma = a.sigma
		if spec.Sigma == 0 {
			thr := a.threshold
			if thr <= 0 {
				thr = fit.AutoThreshold(im)
			}
			s, ok := fit.BackgroundSigma(im, thr)
			if !ok {
				return fmt.Errorf("%s: too little air to estimate the noise; give --sigma", a.series)
			}
			spec.Sigma = s
		}
	}
	model, err := fit.New(spec)
	if err != nil {
		return err
	}
	if _, err := model.NewFitter(im.Acq); err != nil {
		hint := ""
		if errors.Is(err, fit.ErrProtocol) {
			hint = "; the sidecar (" + series.SidecarName(a.series) + ") or --te/--ti/--tr/--fa give the parameters"
		}
		return fmt.Errorf("%s: model %s: %v%s", a.series, model.Name(), err, hint)
	}
	st, err := newStage(e, a.out, a.force)
	if err != nil {
		return err
	}
	defer st.Abort()
	tLoad := time.Since(t0)

	var bar *progressbar.ProgressBar
	if e.terminal && !a.quiet {
		bar = progressbar.NewOptions(im.Voxels(), progressbar.OptionSetWriter(e.stderr),
			progressbar.OptionSetDescription("fitting "+model.Name()), progressbar.OptionShowCount(),
			progressbar.OptionThrottle(100*time.Millisecond), progressbar.OptionClearOnFinish())
		opt.Progress = func(done int) { bar.Set(done) }
	}
	t1 := time.Now()
	maps, err := fit.Run(ctx, im, model, opt)
	if bar != nil {
		bar.Finish()
	}
	if err != nil {
		return err
	}
	tFit := time.Since(t1)
	workers := a.workers
	if workers == 0 {
		workers = runtime.NumCPU()
	}
	settings := map[string]any{
		"model": model.Name(), "method": model.Method(), "offset": a.offset, "noise": a.noise,
		"skip_echoes": a.skip, "workers": workers, "threshold": a.threshold, "no_mask": a.noMask,
		"mask": a.maskFile, "b1": a.b1File, "efficiency": a.efficiency, "min_ms": a.minT, "max_ms": a.maxT,
		"solver":      map[bool]string{false: "dedicated", true: "gonum"}[a.gonum],
		"t1_fixed_ms": a.t1, "refocus_deg": a.refocus, "window_ms": a.window, "epg_basis": a.epgBasis,
	}
	if spec.Sigma > 0 {
		settings["sigma"] = spec.Sigma
	}
	if a.maskFile != "" {
		inputs = append(inputs, series.Input{Path: a.maskFile, Role: "mask"})
	}
	if a.b1File != "" {
		inputs = append(inputs, series.Input{Path: a.b1File, Role: "b1"})
	}
	t2 := time.Now()
	info := &mapset.Info{Model: model.Name(), Method: model.Method(), Version: version(), Settings: settings,
		Inputs: inputs, Source: im.Source, Acq: im.Acq,
		Timings: map[string]float64{"load": tLoad.Seconds(), "fit": tFit.Seconds()}}
	drawn := a.previews(ctx, st, model.Outputs(), wholeMaps(maps, im.Dims, im.Affine))
	if _, err := mapset.Write(st, maps, im, info); err != nil {
		drawn()
		return err
	}
	if err := drawn(); err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	if !a.quiet {
		nv := im.Voxels()
		fmt.Fprintf(e.stdout, "wrote %s: %s/%s on %d voxels in %.2f s (%.0f voxels/s, %d workers); write %.2f s\n",
			a.out, model.Name(), model.Method(), nv, tFit.Seconds(), float64(nv)/tFit.Seconds(), workers, time.Since(t2).Seconds())
		fmt.Fprintln(e.stdout, "  status: "+statusLine(maps.Counts))
	}
	return nil
}

func statusLine(c [fit.NumStatus]int) string {
	var parts []string
	for s, n := range c {
		if n > 0 {
			parts = append(parts, fmt.Sprintf("%s %d", fit.Status(s), n))
		}
	}
	sort.Strings(parts)
	return strings.Join(parts, ", ")
}

// sameGrid checks that an auxiliary image lies on the series grid.
func sameGrid(path string, aux, im *volume.Image, what string) error {
	if aux.Dims[0] != im.Dims[0] || aux.Dims[1] != im.Dims[1] || aux.Dims[2] != im.Dims[2] {
		return fmt.Errorf("%s: %s is %d×%d×%d, the series %d×%d×%d", path, what,
			aux.Dims[0], aux.Dims[1], aux.Dims[2], im.Dims[0], im.Dims[1], im.Dims[2])
	}
	if aux.Dims[3] != 1 {
		return fmt.Errorf("%s: %s has %d volumes, want 1", path, what, aux.Dims[3])
	}
	if !volume.SameGrid(aux, im, 1e-3) {
		return fmt.Errorf("%s: %s has the series' size but another position or orientation (affine differs)", path, what)
	}
	return nil
}

func readMask(path string, im *volume.Image) ([]bool, error) {
	m, err := nifti.Read(path)
	if err != nil {
		return nil, err
	}
	if err := sameGrid(path, m, im, "mask"); err != nil {
		return nil, err
	}
	mask := make([]bool, len(m.Data))
	any := false
	for i, v := range m.Data {
		mask[i] = v > 0
		any = any || mask[i]
	}
	if !any {
		return nil, fmt.Errorf("%s: mask selects no voxel", path)
	}
	return mask, nil
}

// readB1 reads a relative B1 map; a map whose median is above 10 is taken
// to be in percent (BIDS TB1map recommends percent) and divided by 100.
func readB1(path string, im *volume.Image) ([]float32, error) {
	m, err := nifti.Read(path)
	if err != nil {
		return nil, err
	}
	if err := sameGrid(path, m, im, "B1 map"); err != nil {
		return nil, err
	}
	var pos []float64
	for _, v := range m.Data {
		if v > 0 && !math.IsInf(float64(v), 0) {
			pos = append(pos, float64(v))
		}
	}
	if len(pos) == 0 {
		return nil, fmt.Errorf("%s: B1 map holds no positive value", path)
	}
	sort.Float64s(pos)
	scale := float32(1)
	if pos[len(pos)/2] > 10 {
		scale = 0.01
	}
	out := make([]float32, len(m.Data))
	for i, v := range m.Data {
		out[i] = v * scale
	}
	return out, nil
}

// defaultMemory is the default slab budget of --memory: 1 GiB.
const defaultMemory = 1 << 30

// byteFlag is a size in bytes, given as a number with an optional K, M, G
// or T suffix (powers of 1024; "GiB", "GB" and "G" alike).
type byteFlag int64

func (b *byteFlag) String() string { return strconv.FormatInt(int64(*b), 10) }
func (b *byteFlag) Set(s string) error {
	t := strings.ToUpper(strings.TrimSpace(s))
	t = strings.TrimSuffix(strings.TrimSuffix(t, "B"), "I")
	mult := int64(1)
	if n := len(t); n > 0 {
		switch t[n-1] {
		case 'K':
			mult = 1 << 10
		case 'M':
			mult = 1 << 20
		case 'G':
			mult = 1 << 30
		case 'T':
			mult = 1 << 40
		}
		if mult > 1 {
			t = t[:n-1]
		}
	}
	v, err := strconv.ParseFloat(strings.TrimSpace(t), 64)
	if err != nil || !(v > 0) || v*float64(mult) > 1<<50 {
		return fmt.Errorf("%q is not a size such as 512M or 2G", s)
	}
	*b = byteFlag(v * float64(mult))
	return nil
}

// slabSource is a NIfTI series opened for reading by slabs, with its
// protocol.
type slabSource struct {
	r      *nifti.SlabReader
	vols   []int // volumes fitted (after --skip-echoes), in file order
	acq    []volume.Acquisition
	src    volume.Source
	inputs []series.Input
}

// openSlabSource opens a NIfTI series: the header, the sidecar beside it
// and the command-line lists, as series.Load does, without the samples.
func openSlabSource(a *fitArgs, tmpDir string) (*slabSource, error) {
	if a.seriesID != "" {
		return nil, fmt.Errorf("%s: --series applies to DICOM folders, not to a NIfTI file", a.series)
	}
	r, err := nifti.OpenSlabs(a.series, &nifti.SlabOptions{TempDir: tmpDir})
	if err != nil {
		return nil, err
	}
	s := &slabSource{r: r, src: r.Source()}
	nt := r.Dims()[3]
	fail := func(err error) (*slabSource, error) {
		r.Close()
		return nil, err
	}
	s.acq, s.inputs, err = series.NIfTIProtocol(a.series, nt, &s.src, &series.Overrides{TE: a.te.list(), TI: a.ti.list(), TR: a.tr.list(), FA: a.fa.list()})
	if err != nil {
		return fail(err)
	}
	if nt < 2 {
		return fail(fmt.Errorf("%s: holds %d volume; a relaxation fit needs a 4-D series", a.series, nt))
	}
	s.vols = make([]int, nt)
	for i := range s.vols {
		s.vols[i] = i
	}
	if a.skip != 0 {
		if s.vols, s.acq, err = skipVolumes(s.acq, a.skip); err != nil {
			return fail(fmt.Errorf("%s: --skip-echoes: %v", a.series, err))
		}
	}
	return s, nil
}

// skipVolumes leaves out the n volumes of shortest echo time, as
// series.SkipEchoes does, returning the volumes kept and their protocol.
func skipVolumes(acq []volume.Acquisition, n int) ([]int, []volume.Acquisition, error) {
	nt := len(acq)
	if n < 0 || n >= nt {
		return nil, nil, fmt.Errorf("cannot skip %d of %d echoes", n, nt)
	}
	order := make([]int, nt)
	for i := range order {
		order[i] = i
		if math.IsNaN(acq[i].EchoTime) {
			return nil, nil, fmt.Errorf("cannot skip echoes: echo time of volume %d is unknown", i+1)
		}
	}
	sort.SliceStable(order, func(x, y int) bool { return acq[order[x]].EchoTime < acq[order[y]].EchoTime })
	drop := map[int]bool{}
	for _, t := range order[:n] {
		drop[t] = true
	}
	var vols []int
	var kept []volume.Acquisition
	for t := range acq {
		if !drop[t] {
			vols = append(vols, t)
			kept = append(kept, acq[t])
		}
	}
	return vols, kept, nil
}

// auxSlabs reads a 3-D map on the series grid (mask or B1) slab by slab.
type auxSlabs struct {
	r     *nifti.SlabReader
	buf   []float32
	scale float32 // applied to every value read (B1 in percent: 0.01)
}

// survey reads the map once, slab by slab, and counts its positive finite
// values and those at most 10: enough to tell whether the median of the
// positive values is above 10 (a B1 map in percent), as readB1 decides on
// the whole map, without holding it.
func (x *auxSlabs) survey(plan fit.SlabPlan, plane int) (pos, small int, err error) {
	for i := 0; i+1 < len(plan.Slabs); i++ {
		b, err := x.read(plan.Slabs[i], plan.Slabs[i+1], plane)
		if err != nil {
			return 0, 0, err
		}
		for _, v := range b {
			if v > 0 && !math.IsInf(float64(v), 0) {
				pos++
				if v <= 10 {
					small++
				}
			}
		}
	}
	return pos, small, nil
}

func openAux(path string, dims [4]int, affine volume.Affine, what, tmpDir string) (*auxSlabs, error) {
	r, err := nifti.OpenSlabs(path, &nifti.SlabOptions{TempDir: tmpDir})
	if err != nil {
		return nil, err
	}
	stub := &volume.Image{Dims: r.Dims(), Affine: r.Affine()}
	ref := &volume.Image{Dims: dims, Affine: affine}
	if err := sameGrid(path, stub, ref, what); err != nil {
		r.Close()
		return nil, err
	}
	return &auxSlabs{r: r}, nil
}

func (x *auxSlabs) read(z0, z1, plane int) ([]float32, error) {
	n := (z1 - z0) * plane
	if cap(x.buf) < n {
		x.buf = make([]float32, n)
	}
	x.buf = x.buf[:n]
	if err := x.r.ReadSlab(x.buf, z0, z1, nil); err != nil {
		return nil, err
	}
	if x.scale != 0 && x.scale != 1 {
		for i, v := range x.buf {
			x.buf[i] = v * x.scale
		}
	}
	return x.buf, nil
}

// fitStream fits a NIfTI series slab by slab within the --memory budget:
// a first pass over the slabs finds the automatic threshold (and the noise
// level for --noise rician without --sigma) when the series holds more
// than one slab; the second reads, fits and appends each slab to the maps.
// The maps are bit-identical to fitting the whole series at once.
func fitStream(ctx context.Context, a *fitArgs, e *env) (err error) {
	t0 := time.Now()
	spec := fit.Spec{Model: a.model, Method: a.method, Offset: a.offset, Efficiency: a.efficiency, MinT: a.minT, MaxT: a.maxT, Gonum: a.gonum}
	if a.sigma > 0 && a.noise != "rician" {
		return fmt.Errorf("--sigma needs --noise rician")
	}
	if a.b1File != "" && a.model != "t1-vfa" {
		return fmt.Errorf("--b1 applies to t1-vfa only")
	}
	if a.noise == "rician" {
		spec.Sigma = a.sigma
		if spec.Sigma == 0 {
			spec.Sigma = 1 // placeholder for the checks below; estimated later
		}
	}
	model, err := fit.New(spec)
	if err != nil {
		return err
	}
	st, err := newStage(e, a.out, a.force)
	if err != nil {
		return err
	}
	defer st.Abort()
	tmpDir := st.Path("")
	src, err := openSlabSource(a, tmpDir)
	if err != nil {
		return err
	}
	defer src.r.Close()
	if _, err := model.NewFitter(src.acq); err != nil {
		hint := ""
		if errors.Is(err, fit.ErrProtocol) {
			hint = "; the sidecar (" + series.SidecarName(a.series) + ") or --te/--ti/--tr/--fa give the parameters"
		}
		return fmt.Errorf("%s: model %s: %v%s", a.series, model.Name(), err, hint)
	}
	dims := src.r.Dims()
	affine := src.r.Affine()
	nx, ny, nz := dims[0], dims[1], dims[2]
	plane := nx * ny
	nvol := len(src.vols)
	inputs := src.inputs
	var mask, b1 *auxSlabs
	if a.maskFile != "" {
		if mask, err = openAux(a.maskFile, dims, affine, "mask", tmpDir); err != nil {
			return err
		}
		defer mask.r.Close()
		inputs = append(inputs, series.Input{Path: a.maskFile, Role: "mask"})
	}
	if a.b1File != "" {
		if b1, err = openAux(a.b1File, dims, affine, "B1 map", tmpDir); err != nil {
			return err
		}
		defer b1.r.Close()
		inputs = append(inputs, series.Input{Path: a.b1File, Role: "b1"})
	}

	per := fit.SlabBytesPerSlice(nx, ny, nvol, len(model.Outputs()))
	if mask != nil {
		per += int64(plane) * 5
	}
	if b1 != nil {
		per += int64(plane) * 8
	}
	plan := fit.PlanSlabs(nz, per, int64(a.memory))
	// The slab buffers are allocated once and reused; a soft limit on the
	// heap keeps the collector from letting the little garbage of each
	// slab (worker buffers, compressor state) double the heap before it
	// runs (the default GOGC=100 target is twice the live heap).
	if lim := int64(a.memory) + int64(a.memory)/4 + 256<<20; lim > 0 {
		defer debug.SetMemoryLimit(debug.SetMemoryLimit(lim))
	}
	nslab := len(plan.Slabs) - 1
	if mask != nil {
		pos, _, err := mask.survey(plan, plane)
		if err != nil {
			return err
		}
		if pos == 0 {
			return fmt.Errorf("%s: mask selects no voxel", a.maskFile)
		}
	}
	if b1 != nil {
		pos, small, err := b1.survey(plan, plane)
		if err != nil {
			return err
		}
		if pos == 0 {
			return fmt.Errorf("%s: B1 map holds no positive value", a.b1File)
		}
		// sorted positive values p: p[pos/2] > 10 exactly when at most
		// pos/2 of them are ≤ 10.
		if small <= pos/2 {
			b1.scale = 0.01
		}
	}
	sums := mapset.StartChecksums(inputs) // while the series is read
	buf := make([]float32, plan.Slices*plane*nvol)
	slab := func(i int) (*volume.Image, error) {
		z0, z1 := plan.Slabs[i], plan.Slabs[i+1]
		n := (z1 - z0) * plane
		im := &volume.Image{Dims: [4]int{nx, ny, z1 - z0, nvol}, Data: buf[:n*nvol], Affine: affine, Acq: src.acq, Source: src.src}
		return im, src.r.ReadSlab(im.Data, z0, z1, src.vols)
	}
	tLoad := time.Since(t0)

	// Pass 1: threshold and noise level over the whole series.
	t1 := time.Now()
	auto := a.threshold <= 0 && a.maskFile == "" && !a.noMask
	needSigma := a.noise == "rician" && a.sigma == 0
	thr := a.threshold
	var first *volume.Image // the one slab, when the series is a single slab
	if nslab == 1 {
		// The peaks of the automatic threshold are taken volume by volume
		// while the rest of the series is still being read.
		var peaks []float32
		if auto {
			peaks = fit.ResetPeaks(make([]float32, plane*nz))
			src.r.VolumeDone = func(_ int, vol []float32) { fit.MaxInto(peaks, vol) }
		}
		// A .nii.gz read whole may decode its second half on another CPU,
		// within what the slab plan leaves of the memory budget.
		src.r.SplitMemory = max(int64(a.memory)-per*int64(nz), 0)
		first, err = slab(0)
		src.r.VolumeDone, src.r.SplitMemory = nil, 0
		if err != nil {
			return err
		}
		if auto {
			thr = fit.PeaksThreshold(peaks)
		}
	} else if auto {
		if thr, err = streamThreshold(ctx, nslab, slab, tmpDir); err != nil {
			return err
		}
	}
	if needSigma {
		sthr := a.threshold
		if sthr <= 0 {
			sthr = thr
			if !auto {
				// As the in-memory path: the air is judged by the automatic
				// threshold even when a mask or --no-mask decides the fit.
				if nslab == 1 {
					sthr = fit.AutoThreshold(first)
				} else if sthr, err = streamThreshold(ctx, nslab, slab, tmpDir); err != nil {
					return err
				}
			}
		}
		var bg fit.Background
		for i := 0; i < nslab; i++ {
			im := first
			if im == nil {
				if im, err = slab(i); err != nil {
					return err
				}
			}
			bg.Add(im, sthr)
		}
		s, ok := bg.Sigma()
		if !ok {
			return fmt.Errorf("%s: too little air to estimate the noise; give --sigma", a.series)
		}
		spec.Sigma = s
		if model, err = fit.New(spec); err != nil {
			return err
		}
	}
	tSurvey := time.Since(t1)

	// Pass 2: fit and write slab by slab.
	settings := map[string]any{
		"model": model.Name(), "method": model.Method(), "offset": a.offset, "noise": a.noise,
		"skip_echoes": a.skip, "workers": workersOf(a.workers), "threshold": a.threshold, "no_mask": a.noMask,
		"mask": a.maskFile, "b1": a.b1File, "efficiency": a.efficiency, "min_ms": a.minT, "max_ms": a.maxT,
		"solver":       map[bool]string{false: "dedicated", true: "gonum"}[a.gonum],
		"memory_bytes": int64(a.memory), "slabs": nslab, "slices_per_slab": plan.Slices,
	}
	if spec.Sigma > 0 {
		settings["sigma"] = spec.Sigma
	}
	timings := map[string]float64{}
	info := &mapset.Info{Model: model.Name(), Method: model.Method(), Version: version(), Settings: settings,
		Inputs: inputs, Source: src.src, Acq: src.acq, Timings: timings, Sums: sums}
	w, err := mapset.NewWriter(st, model.Outputs(), [3]int{nx, ny, nz}, affine, info)
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			w.Abort()
		}
	}()
	var bar *progressbar.ProgressBar
	opt := &fit.Options{Workers: a.workers, Threshold: thr, NoThreshold: thr <= 0}
	offset := 0
	if e.terminal && !a.quiet {
		bar = progressbar.NewOptions(plane*nz, progressbar.OptionSetWriter(e.stderr),
			progressbar.OptionSetDescription("fitting "+model.Name()), progressbar.OptionShowCount(),
			progressbar.OptionThrottle(100*time.Millisecond), progressbar.OptionClearOnFinish())
		opt.Progress = func(done int) { bar.Set(offset + done) }
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
		if im == nil {
			if im, err = slab(i); err != nil {
				return err
			}
		}
		opt.Mask, opt.B1 = nil, nil
		if mask != nil {
			m, err := mask.read(z0, z1, plane)
			if err != nil {
				return err
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
				return err
			}
		}
		tRead += time.Since(tr)
		tf := time.Now()
		if maps, err = fit.RunTo(ctx, maps, im, model, opt); err != nil {
			if bar != nil {
				bar.Finish()
			}
			return err
		}
		tFit += time.Since(tf)
		if nslab == 1 {
			// The previews are drawn from the maps in memory while the map
			// files are compressed and written.
			drawn = a.previews(ctx, st, model.Outputs(), wholeMaps(maps, [4]int{nx, ny, nz, 1}, affine))
		}
		offset += im.Voxels()
		for s, c := range maps.Counts {
			counts[s] += c
		}
		tw := time.Now()
		maps.Threshold = thr
		if err = w.Append(maps); err != nil {
			return err
		}
		tWrite += time.Since(tw)
		first = nil
	}
	if bar != nil {
		bar.Finish()
	}
	// Temporary uncompressed copies live in the stage: remove them before
	// the folder is committed.
	for _, r := range []*nifti.SlabReader{src.r, auxReader(mask), auxReader(b1)} {
		if r != nil {
			if err = r.Close(); err != nil {
				return err
			}
		}
	}
	if nslab > 1 {
		// The slab buffers (up to --memory) are not needed any more: let
		// the previews, which read the maps back, reuse their memory.
		buf, maps = nil, nil
		runtime.GC()
	}
	tc := time.Now()
	timings["load"] = tLoad.Seconds()
	timings["survey"] = tSurvey.Seconds()
	timings["read"] = tRead.Seconds()
	timings["fit"] = tFit.Seconds()
	timings["write"] = tWrite.Seconds()
	if _, err = w.Close(); err != nil {
		return err
	}
	if drawn == nil { // several slabs: drawn from the finished files
		drawn = a.previews(ctx, st, model.Outputs(), nil)
	}
	err = drawn()
	drawn = nil
	if err != nil {
		return err
	}
	if err = st.Commit(); err != nil {
		return err
	}
	if !a.quiet {
		nv := plane * nz
		fmt.Fprintf(e.stdout, "wrote %s: %s/%s on %d voxels in %.2f s (%.0f voxels/s, %d workers, %d slab%s); write %.2f s\n",
			a.out, model.Name(), model.Method(), nv, tFit.Seconds(), float64(nv)/tFit.Seconds(), workersOf(a.workers),
			nslab, map[bool]string{true: "", false: "s"}[nslab == 1], (tWrite + time.Since(tc)).Seconds())
		fmt.Fprintln(e.stdout, "  status: "+statusLine(counts))
	}
	return nil
}

func workersOf(n int) int {
	if n == 0 {
		return runtime.NumCPU()
	}
	return n
}

func auxReader(x *auxSlabs) *nifti.SlabReader {
	if x == nil {
		return nil
	}
	return x.r
}

// streamThreshold finds the automatic threshold over every slab: the
// per-voxel peaks are spilled to a temporary file (4 bytes a voxel) so
// memory does not grow with the series, then binned once the top is known.
func streamThreshold(ctx context.Context, nslab int, slab func(int) (*volume.Image, error), tmpDir string) (float64, error) {
	f, err := os.CreateTemp(tmpDir, ".peaks-*.raw")
	if err != nil {
		return 0, err
	}
	// Unlinked at once where the system allows it (Unix), so that not even
	// a killed run leaves it behind; elsewhere removed on return.
	unlinked := os.Remove(f.Name()) == nil
	defer func() {
		f.Close()
		if !unlinked {
			os.Remove(f.Name())
		}
	}()
	var ph fit.PeakHistogram
	var peaks []float32
	bw := bufio.NewWriterSize(f, 1<<20)
	total := 0
	var raw [4 << 10]byte
	for i := 0; i < nslab; i++ {
		if ctx.Err() != nil {
			return 0, ctx.Err()
		}
		im, err := slab(i)
		if err != nil {
			return 0, err
		}
		peaks = ph.Peaks(peaks, im)
		for lo := 0; lo < len(peaks); lo += len(raw) / 4 {
			part := peaks[lo:min(lo+len(raw)/4, len(peaks))]
			for i, v := range part {
				binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(v))
			}
			if _, err := bw.Write(raw[:4*len(part)]); err != nil {
				return 0, fmt.Errorf("%s: %w", f.Name(), err)
			}
		}
		total += len(peaks)
	}
	if err := bw.Flush(); err != nil {
		return 0, fmt.Errorf("%s: %w", f.Name(), err)
	}
	if _, err := f.Seek(0, io.SeekStart); err != nil {
		return 0, err
	}
	br := bufio.NewReaderSize(f, 1<<20)
	part := make([]float32, len(raw)/4)
	for done := 0; done < total; {
		n := min(len(part), total-done)
		if _, err := io.ReadFull(br, raw[:4*n]); err != nil {
			return 0, fmt.Errorf("%s: %w", f.Name(), err)
		}
		for i := range part[:n] {
			part[i] = math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
		}
		ph.Add(part[:n])
		done += n
	}
	return ph.Threshold(), nil
}
