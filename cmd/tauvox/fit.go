package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"runtime/pprof"
	"sort"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/cli"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/preview"
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
Masking: a voxel is fitted when its largest sample stands above the noise:
σ is estimated from the air and the level is the one an air voxel exceeds
with probability 1/1000 (without usable air: half of Otsu's threshold of
all voxels' largest samples); provenance.json records the rule, level and
σ. --threshold sets the level, --mask FILE gives a mask (non-zero = fit),
--no-mask fits all.`

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

// fitArgs are the flags of tauvox fit: the pipeline's Config and what only
// the command line needs.
type fitArgs struct {
	c                 pipeline.Config
	noise, cpuprofile string
	window            cli.Repeat
	quiet             bool
	force             cli.Force
	te, ti, tr, fa    cli.List
	memory            cli.Bytes
}

// modelArg returns the value of --model (or -model, --model=M) in args,
// "" when there is none.
func modelArg(args []string) string {
	for i, a := range args {
		a = "-" + strings.TrimLeft(a, "-")
		if v, ok := strings.CutPrefix(a, "-model="); ok {
			return v
		}
		if a == "-model" && i+1 < len(args) {
			return args[i+1]
		}
	}
	return ""
}

// modelHelp is the section of one model, from the registry: for fit
// --model M --help and tauvox help model M.
func modelHelp(m fit.ModelInfo) string {
	opts := "none"
	if len(m.Options) > 0 {
		opts = "--" + strings.Join(m.Options, ", --")
	}
	return fmt.Sprintf("Model %s: %s\nmethods: %s (default %s); needs %s per volume; options: %s\nreference: %s\n\n%s\n",
		m.Name, m.Summary, strings.Join(m.Methods, ", "), m.Methods[0], m.Needs, opts, m.Reference, m.Help)
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
	fs.Var(&a.force, "force", cli.ForceUsage)
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
	fs.Var(&a.window, "range", rangeUsage)
	fs.StringVar(&a.cpuprofile, "cpuprofile", "", "write a CPU profile to this file")
	a.memory = cli.Bytes(pipeline.DefaultMemory)
	fs.Var(&a.memory, "memory", "memory budget for the slabs of a NIfTI or DICOM series, bytes or with K, M, G (default 1G); larger series are read and fitted a range of slices at a time")
	if m, ok := fit.Lookup(modelArg(args)); ok {
		// fit --model M --help: the model first, then the options.
		setHelp(fs, func() {
			fmt.Fprint(e.stdout, modelHelp(m))
			fmt.Fprintf(e.stdout, "\nUsage: tauvox fit SERIES --model %s --out DIR [options]\n(tauvox fit --help for the other models and the input rules)\n\nOptions:\n", m.Name)
			fs.SetOutput(e.stdout)
			fs.PrintDefaults()
			fs.SetOutput(io.Discard)
		})
	}
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
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
	w, err := preview.ParseWindows(a.window)
	if err != nil {
		return fmt.Errorf("--range: %v", err)
	}
	c.Window = w
	c.Series = pos[0]
	c.Force = a.force.On
	if c.ForceAll, err = a.force.All(c.Out); err != nil {
		return err
	}
	c.Rician = a.noise == "rician"
	c.Overrides.TE, c.Overrides.TI, c.Overrides.TR, c.Overrides.FA = a.te.List(), a.ti.List(), a.tr.List(), a.fa.List()
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
