package main

import (
	"context"
	"flag"
	"fmt"
	"math"
	"os"
	"strings"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/cli"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/roi/phantom"
)

type simArgs struct {
	format               string
	enhanced             bool
	tilt                 float64
	drift                cli.Factors
	scanner, date, clock string
	description          string
	kind, out            string
	force                cli.Force
	field, temp, sigma   float64
	rotation, b1, ineff  float64
	mirrored             bool
	seed                 uint64
	matrix, slices       int
	center               cli.Vec
	te, ti, tr, fa       cli.List
}

func simFlags(a *simArgs, e *env) *flag.FlagSet {
	var b strings.Builder
	for _, m := range fit.Models() {
		if m.Simulate != nil {
			fmt.Fprintf(&b, "  %-7s %s\n", m.Name, m.Simulate.Summary)
		}
	}
	fs := newFlags("simulate", "--kind K --out DIR [options]",
		"Writes a synthetic series of the built-in demo phantom (invented values) with\nknown truth: DIR/<kind>.nii.gz with its BIDS sidecar, and truth_<Q>map.nii.gz\n(NaN outside whole-voxel vial interiors). Kinds:\n"+b.String(), e)
	fs.StringVar(&a.kind, "kind", "", "acquisition to simulate (required)")
	fs.StringVar(&a.out, "out", "", "output folder (required)")
	fs.Var(&a.force, "force", cli.ForceUsage)
	fs.Float64Var(&a.field, "field", 1.5, "field strength, T (reference rows exist at 1.5 and 3)")
	fs.Float64Var(&a.temp, "temperature", 20, "phantom temperature, °C")
	fs.Float64Var(&a.sigma, "sigma", 10, "Rician noise SD (fully relaxed signal of PD 1 is 1000); 0 for none")
	fs.Var(&a.center, "center", "phantom centre in scanner RAS mm, x,y,z")
	fs.Float64Var(&a.rotation, "rotation", 0, "in-plane rotation of the phantom, degrees")
	fs.BoolVar(&a.mirrored, "mirrored", false, "phantom lies face down (mirror image), as phantom --mirrored")
	fs.Float64Var(&a.b1, "b1", 1, "transmit field scale applied to every flip angle")
	fs.Float64Var(&a.ineff, "inversion-efficiency", 1, "inversion efficiency (1 = perfect 180°)")
	fs.Uint64Var(&a.seed, "seed", 1, "noise seed")
	fs.IntVar(&a.matrix, "matrix", 96, "in-plane matrix (2.5 mm voxels)")
	fs.IntVar(&a.slices, "slices", 3, "number of 5 mm slices")
	fs.StringVar(&a.format, "format", "nifti", "nifti (NIfTI + BIDS sidecar) or dicom (a classic MR series, one file per slice and volume)")
	fs.BoolVar(&a.enhanced, "enhanced", false, "with --format dicom: one Enhanced MR multi-frame file")
	fs.Float64Var(&a.tilt, "tilt", 0, "tilt the slices about the scanner x axis by this many degrees (oblique)")
	fs.StringVar(&a.scanner, "scanner", "TVX-SIM1", "station name written to the sidecar (invented)")
	fs.StringVar(&a.description, "description", "", "series description (default \"tauvox demo phantom KIND\")")
	fs.StringVar(&a.date, "date", "", "acquisition date YYYY-MM-DD written to the sidecar")
	fs.StringVar(&a.clock, "time", "09:00", "acquisition time HH:MM (with --date)")
	a.drift = cli.Factors{}
	fs.Var(a.drift, "drift", "scale a vial's true T1 and T2, VIAL=FACTOR (repeatable)")
	fs.Var(&a.te, "te", "override echo times, ms")
	fs.Var(&a.ti, "ti", "override inversion times, ms")
	fs.Var(&a.tr, "tr", "override repetition times, ms")
	fs.Var(&a.fa, "fa", "override flip angles, degrees")
	return fs
}

func (a *simArgs) scene() *phantom.Scene {
	sigma := a.sigma
	if sigma == 0 {
		sigma = -1
	}
	return &phantom.Scene{Def: phantom.Demo(), Field: a.field, Temperature: a.temp, Center: a.center.V,
		Rotation: a.rotation, Mirror: a.mirrored, Matrix: a.matrix, Slices: a.slices, Sigma: sigma,
		B1: a.b1, Efficiency: a.ineff, Seed: a.seed, Shift: a.drift, Tilt: a.tilt}
}

func runSimulate(_ context.Context, args []string, e *env) error {
	var a simArgs
	fs := simFlags(&a, e)
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	if a.kind == "" || a.out == "" {
		return fmt.Errorf("--kind and --out are required (see --help)")
	}
	if a.matrix < 8 || a.matrix > 1024 || a.slices < 1 || a.slices > 256 {
		return fmt.Errorf("--matrix must be 8…1024 and --slices 1…256")
	}
	if !(a.sigma >= 0) || !(a.field > 0) || !(a.b1 > 0) {
		return fmt.Errorf("--sigma must be ≥ 0, --field and --b1 positive")
	}
	if a.format != "nifti" && a.format != "dicom" {
		return fmt.Errorf("--format must be nifti or dicom")
	}
	if a.enhanced && a.format != "dicom" {
		return fmt.Errorf("--enhanced needs --format dicom")
	}
	if math.Abs(a.tilt) >= 60 {
		return fmt.Errorf("--tilt must be below 60°")
	}
	st, err := newStage(e, a.out, a.force)
	if err != nil {
		return err
	}
	defer st.Abort()
	sim, err := a.simulation()
	if err != nil {
		return err
	}
	files, err := pipeline.Simulate(st.Path(""), sim)
	if err != nil {
		return err
	}
	if err := st.Commit(); err != nil {
		return err
	}
	fmt.Fprintf(e.stdout, "wrote %s: %s\n", a.out, strings.Join(files, ", "))
	return nil
}

// simulation returns the pipeline's description of the series the flags
// ask for.
func (a *simArgs) simulation() (*pipeline.Simulation, error) {
	s := &pipeline.Simulation{Kind: a.kind, Scene: a.scene(), TE: a.te.List(), TI: a.ti.List(), TR: a.tr.List(), FA: a.fa.List(),
		DICOM: a.format == "dicom", Enhanced: a.enhanced, Description: a.description, Scanner: a.scanner,
		Temperature: a.temp, Noise: a.sigma, B1: a.b1}
	if a.date != "" {
		t, err := time.Parse("2006-01-02 15:04", a.date+" "+a.clock)
		if err != nil {
			return nil, fmt.Errorf("--date/--time: want YYYY-MM-DD and HH:MM")
		}
		s.Acquired = t
	}
	return s, nil
}

func mkdirAll(dir string) error { return os.MkdirAll(dir, 0o755) }
