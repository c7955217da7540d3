package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"runtime/pprof"
	"sort"
	"strconv"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/io/sidecar"
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

// modelList is the model table of fit --help, read from the registry.
func modelList() string {
	var b strings.Builder
	for _, m := range fit.Models() {
		fmt.Fprintf(&b, "  %-7s %s\n          methods: %s (default %s); needs %s per volume", m.Name, m.Summary, strings.Join(m.Methods, ", "), m.Methods[0], m.Needs)
		if len(m.Options) > 0 {
			fmt.Fprintf(&b, "; options --%s", strings.Join(m.Options, ", --"))
		}
		b.WriteString("\n")
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

// fitArgs are the flags of tauvox fit: the pipeline's Config and what only
// the command line needs.
type fitArgs struct {
	c                         pipeline.Config
	noise, cpuprofile, window string
	quiet                     bool
	te, ti, tr, fa            listFlag
	memory                    byteFlag
}

// only returns a flag usage suffix naming the models that take the option.
func only(flag string) string { return " (" + fit.ModelsTaking(flag) + ")" }

func runFit(ctx context.Context, args []string, e *env) error {
	var a fitArgs
	c := &a.c
	fs := newFlags("fit", "SERIES --model M --out DIR [options]", fmt.Sprintf(fitSummary, modelList()), e)
	fs.StringVar(&c.Spec.Model, "model", "", "signal model: "+fit.Names()+" (required)")
	fs.StringVar(&c.Spec.Method, "method", "", "estimation method (default: the model's first)")
	fs.StringVar(&c.Out, "out", "", "output folder (required; refused if it exists, see --force)")
	fs.StringVar(&c.Overrides.Series, "series", "", "DICOM series or protocol id when SERIES is a folder holding several, or series ids A,B,C to join into one protocol (see tauvox scan)")
	fs.BoolVar(&c.Force, "force", false, "replace an existing output folder")
	fs.StringVar(&c.Mask, "mask", "", "NIfTI mask on the series grid; voxels > 0 are fitted")
	fs.Float64Var(&c.Threshold, "threshold", 0, "fit voxels whose largest sample reaches this value (default automatic)")
	fs.BoolVar(&c.NoMask, "no-mask", false, "fit every voxel (no automatic threshold)")
	fs.IntVar(&c.SkipEchoes, "skip-echoes", 0, "leave out the N shortest echoes")
	fs.StringVar(&c.B1, "b1", "", "relative B1 map (ratio, or percent as in BIDS TB1map)"+only("b1"))
	fs.IntVar(&c.Workers, "workers", 0, "worker goroutines (default: one per CPU)")
	fs.Var(&a.te, "te", "echo times, ms (list or start:step:stop)")
	fs.Var(&a.ti, "ti", "inversion times, ms")
	fs.Var(&a.tr, "tr", "repetition times, ms")
	fs.Var(&a.fa, "fa", "flip angles, degrees")
	fs.BoolVar(&c.Spec.Offset, "offset", false, "fit a constant offset c (nlls)"+only("offset"))
	fs.StringVar(&a.noise, "noise", "gaussian", "gaussian (plain least squares) or rician (fit the noise floor)"+only("noise"))
	fs.Float64Var(&c.Spec.Sigma, "sigma", 0, "noise SD for --noise rician (default: estimated from the air)")
	fs.BoolVar(&c.Spec.Efficiency, "efficiency", false, "fit the saturation efficiency"+only("efficiency"))
	fs.Float64Var(&c.Spec.MinT, "min", 0, "lower bound of the time constant, ms (default per model)")
	fs.Float64Var(&c.Spec.MaxT, "max", 0, "upper bound of the time constant, ms (default per model)")
	fs.Float64Var(&c.Spec.T1Fixed, "t1", 0, "the fixed T1 of the EPG signal, ms (default 1000)"+only("t1"))
	fs.Float64Var(&c.Spec.RefocusAngle, "refocus", 0, "nominal refocusing angle, degrees (default 180)"+only("refocus"))
	fs.Float64Var(&c.Spec.Window, "window", 0, "upper T2 of the short (myelin-water) window, ms (default 40)"+only("window"))
	fs.BoolVar(&c.Spec.EPGBasis, "epg-basis", false, "EPG basis functions with a fitted refocusing angle"+only("epg-basis"))
	fs.BoolVar(&c.Spec.Gonum, "gonum", false, "use gonum's optimiser for nonlinear fits (slow cross-check)")
	fs.BoolVar(&a.quiet, "quiet", false, "no progress bar or summary")
	fs.BoolVar(&c.Overrides.Derived, "derived", false, "read DICOM images marked DERIVED (left out by default; provenance.json then warns)")
	fs.BoolVar(&c.Overrides.KeepIdentifiers, "keep-identifiers", false, "copy the patient name, ID, birth date and accession number of a DICOM series into provenance.json (left out by default)")
	fs.BoolVar(&c.NoPreview, "no-preview", false, "do not write the PNG previews of the maps")
	fs.StringVar(&a.window, "range", "", "preview display window LO,HI in the map's unit (default 1st–99th percentile)")
	fs.StringVar(&a.cpuprofile, "cpuprofile", "", "write a CPU profile to this file")
	a.memory = byteFlag(pipeline.DefaultMemory)
	fs.Var(&a.memory, "memory", "memory budget for the slabs of a NIfTI or DICOM series, bytes or with K, M, G (default 1G); larger series are read and fitted a range of slices at a time")
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		if m, ok := fit.Lookup(c.Spec.Model); ok && errors.Is(err, errHelp) {
			fmt.Fprintf(e.stdout, "\nModel %s: %s\nmethods: %s (default %s); needs %s per volume\n\n%s\n", m.Name, m.Summary,
				strings.Join(m.Methods, ", "), m.Methods[0], m.Needs, m.Help)
		}
		return err
	}
	switch {
	case len(pos) != 1:
		return fmt.Errorf("give exactly one SERIES (see --help)")
	case c.Spec.Model == "":
		return fmt.Errorf("--model is required (see --help)")
	case c.Out == "":
		return fmt.Errorf("--out is required (see --help)")
	case a.noise != "gaussian" && a.noise != "rician":
		return fmt.Errorf("--noise must be gaussian or rician")
	}
	if a.window != "" {
		w, err := preview.ParseWindow(a.window)
		if err != nil {
			return fmt.Errorf("--range: %v", err)
		}
		c.Window = w
	}
	c.Series = pos[0]
	c.Rician = a.noise == "rician"
	c.Overrides.TE, c.Overrides.TI, c.Overrides.TR, c.Overrides.FA = a.te.list(), a.ti.list(), a.tr.list(), a.fa.list()
	c.Memory = int64(a.memory)
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
	return fitSeries(ctx, c, a.quiet, e)
}

// inMemory makes fit load NIfTI and DICOM series whole instead of slab by
// slab (tests compare the two ways).
var inMemory = false

// fitSeries runs the pipeline for tauvox fit: the output check,
// the progress bar and the summary lines.
func fitSeries(ctx context.Context, c *pipeline.Config, quiet bool, e *env) error {
	if err := checkOutput(c.Out, c.Series, c.Mask, c.B1); err != nil {
		return err
	}
	c.Version = version()
	c.Whole = c.Whole || inMemory
	var bar *progressbar.ProgressBar
	var progress pipeline.Progress
	if e.terminal && !quiet {
		progress = func(done, total int) {
			if bar == nil {
				bar = progressbar.NewOptions(total, progressbar.OptionSetWriter(e.stderr),
					progressbar.OptionSetDescription("fitting "+c.Spec.Model), progressbar.OptionShowCount(),
					progressbar.OptionThrottle(100*time.Millisecond), progressbar.OptionClearOnFinish())
			}
			bar.Set(done)
		}
	}
	s, err := pipeline.Run(ctx, c, progress)
	if bar != nil {
		bar.Finish()
	}
	if err != nil {
		return err
	}
	printNotes(e, s.Notes)
	if quiet {
		return nil
	}
	slabs := ""
	if s.BySlab {
		slabs = fmt.Sprintf(", %d slab%s", s.Slabs, map[bool]string{true: "", false: "s"}[s.Slabs == 1])
	}
	fmt.Fprintf(e.stdout, "wrote %s: %s/%s on %d voxels in %.2f s (%.0f voxels/s, %d workers%s); write %.2f s\n",
		c.Out, s.Model, s.Method, s.Voxels, s.Fit.Seconds(), float64(s.Voxels)/s.Fit.Seconds(), s.Workers, slabs, s.Write.Seconds())
	fmt.Fprintln(e.stdout, "  status: "+statusLine(s.Counts))
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
