package main

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"runtime"
	"runtime/pprof"
	"sort"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
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
	fs.StringVar(&a.cpuprofile, "cpuprofile", "", "write a CPU profile to this file")
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
	case a.workers < 0:
		return fmt.Errorf("--workers must be positive")
	case a.noise != "gaussian" && a.noise != "rician":
		return fmt.Errorf("--noise must be gaussian or rician")
	case a.sigma < 0 || math.IsNaN(a.sigma):
		return fmt.Errorf("--sigma must be positive")
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

func fitSeries(ctx context.Context, a *fitArgs, e *env) error {
	t0 := time.Now()
	im, inputs, err := series.Load(a.series, &series.Overrides{TE: a.te.list(), TI: a.ti.list(), TR: a.tr.list(), FA: a.fa.list(), Series: a.seriesID})
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
	st, err := mapset.NewStage(a.out, a.force)
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
	if _, err := mapset.Write(st, maps, im, info); err != nil {
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
