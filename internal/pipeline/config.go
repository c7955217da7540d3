package pipeline

import (
	"errors"
	"fmt"
	"github.com/tauvox/tauvox/io/mapset"
	"math"
	"runtime"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// DefaultMemory is the slab budget used when Config.Memory is 0: 1 GiB.
const DefaultMemory = 1 << 30

// Config is one fit: what to read, how to fit it, where to write. Its
// zero value (with Series, Spec.Model and Out set) is a fit with the
// model's defaults, the automatic mask, Gaussian noise and one worker per
// CPU.
type Config struct {
	// Series is the path of the series: a DICOM folder or file, or a NIfTI
	// file (with its sidecar beside it). With Image set it only names the
	// series in messages.
	Series string
	// Image, when not nil, is the series already loaded (batch reads BIDS
	// collections itself); Inputs then lists the files it was read from.
	Image  *volume.Image
	Inputs []series.Input
	// Overrides are the --te/--ti/--tr/--fa lists, the DICOM series id
	// and whether to keep patient identifiers.
	Overrides series.Overrides
	// Spec names the model and its settings. Spec.Sigma is the noise SD
	// given by the user for Rician noise (0: estimated from the air).
	Spec fit.Spec
	// Rician selects the Rician noise model (--noise rician); with
	// Spec.Sigma 0 the noise is estimated from the air.
	Rician bool
	// SkipEchoes leaves out the N shortest echoes.
	SkipEchoes int
	// Mask and B1 are NIfTI files on the series grid ("" for none).
	Mask, B1 string
	// Threshold, NoMask: see fit.Options (0 and false: automatic).
	Threshold float64
	NoMask    bool
	// Workers is the number of fit goroutines; 0 means one per CPU.
	Workers int
	// Memory is the slab budget in bytes for series read from files
	// (NIfTI or DICOM); 0 means DefaultMemory.
	Memory int64
	// Out is the output folder; Force replaces an existing one that holds
	// only what tauvox wrote there, ForceAll (the user named the folder)
	// whatever it holds.
	Out      string
	Force    bool
	ForceAll bool
	// NoPreview leaves out the PNG previews; Window are their display
	// windows by quantity (zero: 1st–99th percentile).
	NoPreview bool
	Window    preview.Windows
	// Whole makes a NIfTI series load whole, as DICOM series are (tests
	// compare the two ways).
	Whole bool
	// Version is the tool version recorded in the outputs.
	Version string
	// Extra settings recorded in provenance.json beside Settings (batch:
	// the BIDS suffix and source).
	Extra map[string]any
	// Hint is appended to a protocol error (where the parameters come
	// from); "" gives the NIfTI sidecar hint.
	Hint string
}

// Progress is told how many of total voxels are done; nil for none.
type Progress func(done, total int)

// Summary is what a finished Run reports.
type Summary struct {
	Model, Method string
	Voxels        int                // voxels of the grid
	Counts        [fit.NumStatus]int // voxels per status
	Workers       int
	Slabs         int  // 1 for a series fitted in one go
	BySlab        bool // read slab by slab (NIfTI or DICOM files), however many slabs
	Fit, Write    time.Duration
	Sigma         float64 // the noise SD used (Rician), 0 otherwise
	// Notes says what was done to the leftovers of an earlier run of the
	// same output that was killed (mapset.Stage.Notes), for the command to
	// print.
	Notes []string
}

// workers returns the worker count actually used.
func (c *Config) workers() int {
	if c.Workers <= 0 {
		return runtime.NumCPU()
	}
	return c.Workers
}

func (c *Config) memory() int64 {
	if c.Memory <= 0 {
		return DefaultMemory
	}
	return c.Memory
}

func (c *Config) noise() string {
	if c.Rician {
		return "rician"
	}
	return "gaussian"
}

// check refuses contradictory settings before anything is read.
func (c *Config) check() error {
	switch {
	case c.Out == "":
		return errors.New("pipeline: no output folder")
	case fit.CheckWorkers(c.Workers) != nil:
		return fit.CheckWorkers(c.Workers)
	case c.Spec.Sigma < 0 || math.IsNaN(c.Spec.Sigma):
		return errors.New("--sigma must be positive")
	case c.Spec.Sigma > 0 && !c.Rician:
		return errors.New("--sigma needs --noise rician")
	}
	if _, ok := fit.Lookup(c.Spec.Model); ok {
		if c.B1 != "" && !fit.Takes(c.Spec.Model, "b1") {
			return fmt.Errorf("--b1 applies to %s only", fit.ModelsTaking("b1"))
		}
		if c.Rician && !fit.Takes(c.Spec.Model, "noise") {
			return fmt.Errorf("--noise rician applies to %s only", fit.ModelsTaking("noise"))
		}
	}
	sigma := c.Spec.Sigma
	if c.Rician && sigma == 0 {
		sigma = 1 // estimated later; any positive value checks the spec
	}
	_, err := c.model(sigma)
	return err
}

// model returns the fit model of c with the noise SD sigma (0: none).
func (c *Config) model(sigma float64) (fit.Model, error) {
	s := c.Spec
	s.Sigma = sigma
	return fit.New(s)
}

// Settings returns every setting that shaped the maps of a fit with model
// m, as recorded in provenance.json: the generic ones and every
// model-specific option of fit.Options (recorded whether set or not, so
// that two provenance files compare key by key). sigma is the noise SD
// used (0: none).
func (c *Config) Settings(m fit.Model, sigma float64) map[string]any {
	s := map[string]any{
		"model": m.Name(), "method": m.Method(), "noise": c.noise(),
		"skip_echoes": c.SkipEchoes, "workers": c.workers(), "threshold": c.Threshold, "no_mask": c.NoMask,
		"mask": c.Mask, "b1": c.B1,
		"solver": map[bool]string{false: "dedicated", true: "gonum"}[c.Spec.Gonum],
	}
	fit.RecordSettings(s, &c.Spec)
	if sigma > 0 {
		s["sigma"] = sigma
	}
	for k, v := range c.Extra {
		s[k] = v
	}
	return s
}

// protocolError explains a protocol the model cannot fit.
func (c *Config) protocolError(m fit.Model, err error) error {
	hint := ""
	if errors.Is(err, fit.ErrProtocol) {
		hint = c.Hint
		switch {
		case hint != "":
		case series.IsNIfTI(c.Series):
			hint = "; the sidecar (" + series.SidecarName(c.Series) + ") or --te/--ti/--tr/--fa give the parameters"
		default:
			hint = "; the DICOM headers or --te/--ti/--tr/--fa give the parameters"
		}
	}
	return c.errorf("model %s: %v%s", m.Name(), err, hint)
}

// errorf returns an error about the series, prefixed with its path when
// it has one (a pre-loaded image is named by the caller).
func (c *Config) errorf(format string, args ...any) error {
	if c.Series == "" {
		return fmt.Errorf(format, args...)
	}
	return fmt.Errorf("%s: "+format, append([]any{c.Series}, args...)...)
}

// newStage starts the output folder out (mapset.NewStage, or
// mapset.NewStageReplacing with all).
func newStage(out string, force, all bool) (*mapset.Stage, error) {
	if all {
		return mapset.NewStageReplacing(out)
	}
	return mapset.NewStage(out, force)
}
