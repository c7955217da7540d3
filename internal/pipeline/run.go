package pipeline

import (
	"context"
	"os"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// Run fits the series of c and writes its maps, previews and
// provenance.json into c.Out (staged: nothing is left behind on error).
// A series from files (NIfTI, or a DICOM series or protocol) is read slab
// by slab within c.Memory unless c.Whole; an image already loaded is
// fitted whole. progress, when not nil, is told how many
// voxels are done.
func Run(ctx context.Context, c *Config, progress Progress) (*Summary, error) {
	if err := c.check(); err != nil {
		return nil, err
	}
	c.Overrides.Notices = nil
	if c.Image == nil && !c.Whole {
		if _, err := os.Stat(c.Series); err == nil {
			return runSlabs(ctx, c, progress)
		}
	}
	return runWhole(ctx, c, progress)
}

// load returns the series of c whole, after --skip-echoes.
func (c *Config) load() (*volume.Image, []series.Input, error) {
	im, inputs := c.Image, c.Inputs
	if im == nil {
		var err error
		o := c.Overrides
		if info, ok := fit.Lookup(c.Spec.Model); ok && o.Needs == "" {
			o.Needs = info.Needs // a folder with several protocols: the one this model fits
		}
		if im, inputs, err = series.Load(c.Series, &o); err != nil {
			return nil, nil, err
		}
	}
	if im.Volumes() < 2 {
		return nil, nil, c.errorf("holds %d volume; a relaxation fit needs a 4-D series", im.Volumes())
	}
	im, err := series.SkipEchoes(im, c.SkipEchoes)
	if err != nil {
		return nil, nil, c.errorf("--skip-echoes: %v", err)
	}
	return im, inputs, nil
}

// runWhole loads the whole series and fits it in one go.
func runWhole(ctx context.Context, c *Config, progress Progress) (*Summary, error) {
	t0 := time.Now()
	im, inputs, err := c.load()
	if err != nil {
		return nil, err
	}
	opt := &fit.Options{Workers: c.Workers, Threshold: c.Threshold, NoThreshold: c.NoMask}
	if c.Mask != "" {
		if opt.Mask, err = readMask(c.Mask, im); err != nil {
			return nil, err
		}
		inputs = append(inputs, series.Input{Path: c.Mask, Role: "mask"})
	}
	if c.B1 != "" {
		if opt.B1, err = readB1(c.B1, im); err != nil {
			return nil, err
		}
		inputs = append(inputs, series.Input{Path: c.B1, Role: "b1"})
	}
	var auto fit.AutoMask
	if c.auto() || (c.Rician && c.Spec.Sigma == 0 && c.Threshold <= 0) {
		auto = fit.AutoMaskOf(im)
	}
	if c.auto() {
		opt.Threshold, opt.NoThreshold = auto.Threshold, auto.Threshold <= 0
	}
	sigma := c.Spec.Sigma
	if c.Rician && sigma == 0 {
		thr := c.Threshold
		if thr <= 0 {
			thr = auto.Threshold
		}
		s, ok := fit.BackgroundSigma(im, thr)
		if !ok {
			return nil, c.errorf("too little air to estimate the noise; give --sigma")
		}
		sigma = s
	}
	model, err := c.model(sigma)
	if err != nil {
		return nil, err
	}
	if _, err := model.NewFitter(im.Acq); err != nil {
		return nil, c.protocolError(model, err)
	}
	st, err := newStage(c.Out, c.Force, c.ForceAll)
	if err != nil {
		return nil, err
	}
	defer st.Abort()
	notes := append(append([]string(nil), c.Overrides.Notices...), st.Notes()...)
	tLoad := time.Since(t0)
	if progress != nil {
		total := im.Voxels()
		opt.Progress = func(done int) { progress(done, total) }
	}
	t1 := time.Now()
	maps, err := fit.Run(ctx, im, model, opt)
	if err != nil {
		return nil, err
	}
	sum := &Summary{Notes: notes, Model: model.Name(), Method: model.Method(), Voxels: im.Voxels(), Counts: maps.Counts,
		Workers: c.workers(), Slabs: 1, Fit: time.Since(t1), Sigma: sigma}
	t2 := time.Now()
	info := &mapset.Info{Model: model.Name(), Method: model.Method(), Version: c.Version, Settings: c.Settings(model, sigma), StatusNames: statusNames(),
		Inputs: inputs, Source: im.Source, Acq: im.Acq, AutoMask: c.autoRecord(auto),
		Timings: map[string]float64{"load": tLoad.Seconds(), "fit": sum.Fit.Seconds()}}
	drawn := c.previews(ctx, st, model.Outputs(), wholeMaps(maps, im.Dims, im.Affine))
	if _, err := mapset.Write(st, outputs(model), toSlab(maps), im, info); err != nil {
		drawn()
		return nil, err
	}
	if err := drawn(); err != nil {
		return nil, err
	}
	if err := st.Commit(); err != nil {
		return nil, err
	}
	sum.Write = time.Since(t2)
	return sum, nil
}

// auto reports whether the automatic mask decides which voxels are fitted.
func (c *Config) auto() bool { return c.Threshold <= 0 && c.Mask == "" && !c.NoMask }

// autoRecord returns the provenance record of the automatic mask m, nil
// when the automatic mask was not applied.
func (c *Config) autoRecord(m fit.AutoMask) *mapset.AutoMask {
	if !c.auto() || m.Rule == "" {
		return nil
	}
	return &mapset.AutoMask{Rule: m.Rule, Threshold: m.Threshold, Sigma: m.Sigma, Rate: m.Rate, Air: m.Air, Otsu: m.Otsu, Why: m.Why}
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

// previews starts drawing the PNG previews into the stage unless
// c.NoPreview, and returns the function that waits for them: with the
// maps in memory (inMemory not nil) they are drawn while the caller
// writes the map files; otherwise the caller must start them after.
func (c *Config) previews(ctx context.Context, st *mapset.Stage, outs []fit.Param, inMemory map[string]*volume.Image) (wait func() error) {
	if c.NoPreview {
		return func() error { return nil }
	}
	done := make(chan error, 1)
	go func() { done <- fitPreviews(ctx, st.Path(""), outs, c.Window, inMemory) }()
	return func() error { return <-done }
}

// outputs returns the map descriptions of a model's outputs for io/mapset.
func outputs(m fit.Model) []mapset.Output {
	var o []mapset.Output
	for _, p := range m.Outputs() {
		o = append(o, mapset.Output(p))
	}
	return o
}

// toSlab returns the maps of a fit as io/mapset takes them (sharing them).
func toSlab(m *fit.Maps) *mapset.Slab {
	return &mapset.Slab{Values: m.Values, SE: m.SE, R2: m.R2, Status: m.Status, Counts: m.Counts[:], Threshold: m.Threshold}
}

// statusNames names the fit status codes in code order.
func statusNames() []string {
	n := make([]string, fit.NumStatus)
	for s := range n {
		n[s] = fit.Status(s).String()
	}
	return n
}
