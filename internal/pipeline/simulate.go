package pipeline

import (
	"fmt"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/roi/phantom"
	"github.com/tauvox/tauvox/volume"
)

// Simulation is one synthetic series of a phantom scene: the registered
// model whose simulator protocol it uses (Kind), protocol overrides, and
// how it is written.
type Simulation struct {
	Kind  string         // a model with a Simulate protocol in the registry
	Scene *phantom.Scene // the phantom, its placement, noise and imperfections
	// TE, TI, TR, FA replace the protocol's values when not nil (ms,
	// degrees); a list of another length makes a protocol of that many
	// volumes from the first volume of the default.
	TE, TI, TR, FA  []float64
	DICOM, Enhanced bool   // a classic (or Enhanced) DICOM series instead of NIfTI + sidecar
	Description     string // series description ("" for "tauvox demo phantom KIND")
	Scanner         string // station name
	Acquired        time.Time
	Temperature     float64 // recorded in the sidecar, °C
	Noise, B1       float64 // recorded in the sidecar
}

// Simulate writes the series of s into the folder dir (DIR/KIND.nii.gz
// with its sidecar, or DIR/KIND/ as DICOM) and the truth maps
// truth_<Q>map.nii.gz, and returns the names written.
func Simulate(dir string, s *Simulation) ([]string, error) {
	info, ok := fit.Lookup(s.Kind)
	var names []string
	for _, m := range fit.Models() {
		if m.Simulate != nil {
			names = append(names, m.Name)
		}
	}
	if !ok || info.Simulate == nil {
		return nil, fmt.Errorf("unknown --kind %q (choose %s)", s.Kind, strings.Join(names, ", "))
	}
	p := info.Simulate
	acq := p.Acq()
	for _, o := range []struct {
		flag string
		l    []float64
		put  func(*volume.Acquisition, float64)
	}{
		{"te", s.TE, func(x *volume.Acquisition, v float64) { x.EchoTime = v }},
		{"ti", s.TI, func(x *volume.Acquisition, v float64) { x.InversionTime = v }},
		{"tr", s.TR, func(x *volume.Acquisition, v float64) { x.RepetitionTime = v }},
		{"fa", s.FA, func(x *volume.Acquisition, v float64) { x.FlipAngle = v }},
	} {
		if o.l == nil {
			continue
		}
		if err := series.CheckUnits(o.flag, o.l); err != nil {
			return nil, err
		}
		if len(o.l) != len(acq) {
			if len(o.l) < 2 {
				return nil, fmt.Errorf("--%s needs at least two values", o.flag)
			}
			base := acq[0]
			acq = make([]volume.Acquisition, len(o.l))
			for i := range acq {
				acq[i] = base
			}
		}
		for i := range acq {
			o.put(&acq[i], o.l[i])
		}
	}
	sc := s.Scene
	// The series is made in memory as float32; refuse before allocating
	// what tauvox could not read back (nifti.DefaultMaxBytes bounds one
	// image read, 2 GiB).
	if need := int64(sc.Matrix) * int64(sc.Matrix) * int64(sc.Slices) * int64(len(acq)) * 4; need > nifti.DefaultMaxBytes {
		return nil, fmt.Errorf("a %d×%d×%d series of %d volumes needs %.1f GiB in memory (float32), above the limit of %.1f GiB for one image; use a smaller --matrix or fewer --slices",
			sc.Matrix, sc.Matrix, sc.Slices, len(acq), float64(need)/(1<<30), float64(nifti.DefaultMaxBytes)/(1<<30))
	}
	for id := range sc.Shift {
		found := false
		for _, v := range sc.Def.Vials {
			found = found || v.ID == id
		}
		if !found {
			return nil, fmt.Errorf("--drift: the demo phantom has no vial %q", id)
		}
	}
	im, err := sc.Series(p.Seq, acq)
	if err != nil {
		return nil, err
	}
	im.Source.Description = "tauvox demo phantom " + s.Kind
	if s.Description != "" {
		im.Source.Description = s.Description
	}
	if s.Scanner != "" {
		im.Source.Scanner = s.Scanner
	}
	var files []string
	if s.DICOM {
		seq := map[fit.Sequence]string{fit.SeqSpinEcho: "SE", fit.SeqGradientEcho: "GR", fit.SeqInversionRecovery: "IR", fit.SeqSaturationRecovery: "SE"}[p.Seq]
		opt := &dicom.WriteOptions{Enhanced: s.Enhanced, Description: im.Source.Description, SeriesNumber: 1 + len(names),
			Sequence: seq, Manufacturer: "tauvox simulator", StationName: im.Source.Scanner, FieldStrength: sc.Field,
			PhantomName: "TAUVOX^DEMO", AcquiredAt: s.Acquired}
		if err := dicom.WriteSeries(filepath.Join(dir, s.Kind), im, opt); err != nil {
			return nil, err
		}
		files = append(files, s.Kind+"/")
	} else {
		extra := map[string]any{
			"Manufacturer":          "tauvox simulator",
			"InstitutionName":       "Harrowgate Imaging Physics (invented)",
			"PhantomTemperature":    s.Temperature,
			"SimulatedNoiseSigma":   s.Noise,
			"SimulatedB1":           s.B1,
			"SimulatedSuggestModel": s.Kind,
		}
		if !s.Acquired.IsZero() {
			extra["AcquisitionDateTime"] = s.Acquired.Format("2006-01-02T15:04:05")
		}
		name := s.Kind + ".nii.gz"
		if err := series.Write(filepath.Join(dir, name), im, extra); err != nil {
			return nil, err
		}
		files = append(files, name, s.Kind+".json")
	}
	qs := []string{"T1", "T2", "PD"}
	if s.Kind == "t2star" {
		qs = append(qs, "T2star")
	}
	sort.Strings(qs)
	for _, q := range qs {
		tr, err := sc.Truth(q)
		if err != nil {
			return nil, err
		}
		fn := "truth_" + q + "map.nii.gz"
		if err := nifti.Write(filepath.Join(dir, fn), tr, &nifti.WriteOptions{Description: "tauvox simulated truth " + q}); err != nil {
			return nil, err
		}
		files = append(files, fn)
	}
	return files, nil
}
