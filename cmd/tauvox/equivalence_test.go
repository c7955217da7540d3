package main

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/dicom"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// equivalence grid: 16×12×2 voxels, the first four columns air (Rician
// noise only, for the noise estimate of --noise rician), the rest tissue
// whose parameters vary from voxel to voxel.
const eqNX, eqNY, eqNZ, eqAir = 16, 12, 2, 4

// eqSeries simulates a series on the equivalence grid: signal(v, acq)
// gives the noiseless samples of tissue voxel v (0-based among the tissue
// voxels); Rician noise of σ = 3 is added with a fixed seed.
func eqSeries(acq []volume.Acquisition, signal func(v int, y []float64)) *volume.Image {
	nv := eqNX * eqNY * eqNZ
	im := &volume.Image{Dims: [4]int{eqNX, eqNY, eqNZ, len(acq)}, Data: make([]float32, nv*len(acq)), Acq: acq,
		Affine: volume.Affine{{-1.5, 0, 0, 12}, {0, -1.5, 0, 9}, {0, 0, 4, -2}}}
	rng := rand.New(rand.NewPCG(15, 2026))
	y := make([]float64, len(acq))
	tissue := 0
	for v := 0; v < nv; v++ {
		clear(y)
		if v%eqNX >= eqAir {
			signal(tissue, y)
			tissue++
		}
		for k := range acq {
			im.Data[k*nv+v] = float32(fit.Rician(rng, y[k], 3))
		}
	}
	return im
}

// eqInputs writes im as a classic DICOM series, reads it back, and writes
// what was read as NIfTI with its sidecar: the two inputs hold the same
// samples on the same grid. It returns the DICOM folder, the NIfTI path
// and a B1 map of 0.9 on the grid.
func eqInputs(t *testing.T, dir, name, seq string, im *volume.Image) (dcm, nii, b1 string) {
	t.Helper()
	dcm = filepath.Join(dir, name+"-dicom")
	opt := &dicom.WriteOptions{Sequence: seq, Description: "equivalence " + name, FieldStrength: 3,
		AcquiredAt: time.Date(2026, 3, 4, 10, 0, 0, 0, time.UTC)}
	if err := dicom.WriteSeries(dcm, im, opt); err != nil {
		t.Fatal(err)
	}
	back, _, err := series.Load(dcm, nil)
	if err != nil {
		t.Fatal(err)
	}
	nii = filepath.Join(dir, name+".nii.gz")
	if err := series.Write(nii, back, nil); err != nil {
		t.Fatal(err)
	}
	b1 = filepath.Join(dir, name+"-b1.nii.gz")
	m := &volume.Image{Dims: [4]int{eqNX, eqNY, eqNZ, 1}, Data: make([]float32, eqNX*eqNY*eqNZ), Affine: back.Affine}
	for i := range m.Data {
		m.Data[i] = 0.9
	}
	if err := nifti.Write(b1, m, nil); err != nil {
		t.Fatal(err)
	}
	return dcm, nii, b1
}

// TestFitFlagsNIfTIAndDICOM: the same simulated series, read as DICOM and
// as NIfTI, fitted with each model-specific flag set to a value other than
// its default: the maps of the two inputs are bit-identical, every flag
// changes the map it acts on (against the same fit without it), and
// provenance.json records it (same settings from both inputs). This is
// the check that the NIfTI path honours --t1, --refocus, --window,
// --epg-basis and --b1 (it once ignored them).
func TestFitFlagsNIfTIAndDICOM(t *testing.T) {
	dir := t.TempDir()
	// A CPMG train of 16 echoes, ESP 10 ms, refocusing 150°·0.9 (the B1
	// map), T1 900 ms; every third voxel has a second, short component
	// (T2 15 ms, 25 %) for the spectrum's short window. Signals from the
	// EPG of fit (checked against published values in fit/epg_test.go).
	se := make([]volume.Acquisition, 16)
	for i := range se {
		se[i] = volume.Acquisition{EchoTime: 10 * float64(i+1), InversionTime: math.NaN(), RepetitionTime: 4000, FlipAngle: 90}
	}
	epg := fit.NewEPG(16)
	long, short := make([]float64, 16), make([]float64, 16)
	seIm := eqSeries(se, func(v int, y []float64) {
		t2 := 40 + 4*float64(v%40)
		epg.CPMG(long, 150*0.9, 10, 900, t2)
		epg.CPMG(short, 150*0.9, 10, 900, 15)
		f := 0.0
		if v%3 == 0 {
			f = 0.25
		}
		for k := range y {
			y[k] = 1000 * ((1-f)*long[k] + f*short[k])
		}
	})
	// Saturation recovery with efficiency 0.85 (signal M0·(1 − k·e^(−TR/T1)),
	// check-values §1.1 textbook form).
	sr := make([]volume.Acquisition, 7)
	for i := range sr {
		sr[i] = volume.Acquisition{EchoTime: 10, InversionTime: math.NaN(), RepetitionTime: 100 * math.Pow(2, float64(i)), FlipAngle: 90}
	}
	srIm := eqSeries(sr, func(v int, y []float64) {
		t1 := 300 + 10*float64(v%100)
		for k, a := range sr {
			y[k] = 1000 * (1 - 0.85*math.Exp(-a.RepetitionTime/t1))
		}
	})
	// Variable flip angle with the actual angles 0.9 × nominal (Ernst
	// equation, check-values §1.1).
	vfa := make([]volume.Acquisition, 6)
	for i, fa := range []float64{2, 5, 10, 15, 20, 30} {
		vfa[i] = volume.Acquisition{EchoTime: 2, InversionTime: math.NaN(), RepetitionTime: 15, FlipAngle: fa}
	}
	vfaIm := eqSeries(vfa, func(v int, y []float64) {
		x := fit.Tissue{PD: 3000, T1: 400 + 10*float64(v%100), T2: 80}
		for k, a := range vfa {
			y[k] = fit.Signal(fit.SeqGradientEcho, x, a.EchoTime, a.InversionTime, a.RepetitionTime, 0.9*a.FlipAngle, 0)
		}
	})
	type input struct{ dcm, nii, b1 string }
	var in = map[string]input{}
	for _, s := range []struct {
		name, seq string
		im        *volume.Image
	}{{"se", "SE", seIm}, {"sr", "SE", srIm}, {"vfa", "GR", vfaIm}} {
		d, n, b := eqInputs(t, dir, s.name, s.seq, s.im)
		in[s.name] = input{d, n, b}
	}

	type flagCase struct {
		args    []string       // the flag and its value; "B1" is replaced by the B1 map
		base    []string       // further flags of both runs (optional)
		record  map[string]any // provenance settings it must record
		changes string         // the map it must change
	}
	cases := []struct {
		model, series string
		flags         []flagCase
	}{
		{"t2", "se", []flagCase{
			{args: []string{"--offset"}, record: map[string]any{"offset": true}, changes: "T2map"},
			{args: []string{"--noise", "rician", "--sigma", "6"}, record: map[string]any{"noise": "rician", "sigma": 6.0}, changes: "T2map"},
			{args: []string{"--noise", "rician"}, record: map[string]any{"noise": "rician"}, changes: "T2map"},
			{args: []string{"--skip-echoes", "2"}, record: map[string]any{"skip_echoes": 2.0}, changes: "T2map"},
			{args: []string{"--method", "loglinear"}, record: map[string]any{"method": "loglinear"}, changes: "T2map"},
			{args: []string{"--max", "150"}, record: map[string]any{"max_ms": 150.0}, changes: "T2map"},
		}},
		{"t2-epg", "se", []flagCase{
			{args: []string{"--t1", "300"}, record: map[string]any{"t1_fixed_ms": 300.0}, changes: "T2map"},
			{args: []string{"--refocus", "150"}, record: map[string]any{"refocus_deg": 150.0}, changes: "B1map"},
			{args: []string{"--b1", "B1"}, record: map[string]any{"b1": "B1"}, changes: "T2map"},
			{args: []string{"--noise", "rician", "--sigma", "6"}, record: map[string]any{"noise": "rician", "sigma": 6.0}, changes: "T2map"},
		}},
		{"t2-spectrum", "se", []flagCase{
			{args: []string{"--window", "25"}, record: map[string]any{"window_ms": 25.0}, changes: "MWFmap"},
			{args: []string{"--epg-basis"}, record: map[string]any{"epg_basis": true}, changes: "MWFmap"},
			{args: []string{"--t1", "300"}, base: []string{"--epg-basis"}, record: map[string]any{"t1_fixed_ms": 300.0, "epg_basis": true}, changes: "T2long"},
		}},
		{"t1-sr", "sr", []flagCase{
			{args: []string{"--efficiency"}, record: map[string]any{"efficiency": true}, changes: "T1map"},
		}},
		{"t1-vfa", "vfa", []flagCase{
			{args: []string{"--b1", "B1"}, record: map[string]any{"b1": "B1"}, changes: "T1map"},
		}},
	}
	n := 0
	fitOnce := func(src, model string, args []string) (map[string][]float32, map[string]any) {
		n++
		out := filepath.Join(dir, fmt.Sprintf("out%d", n))
		all := append([]string{"fit", src, "--model", model, "--out", out, "--quiet", "--no-preview", "--workers", "2"}, args...)
		if code, _, errs := tauvox(t, all...); code != 0 {
			t.Fatalf("%s: exit %d: %s", strings.Join(all, " "), code, errs)
		}
		return mapFiles(t, out), provenanceOf(t, out)["settings"].(map[string]any)
	}
	for _, c := range cases {
		srcs := in[c.series]
		for _, f := range c.flags {
			args := append([]string(nil), f.args...)
			for i, a := range args {
				if a == "B1" {
					args[i] = srcs.b1
				}
			}
			name := c.model + " " + strings.Join(f.args, " ")
			var maps [2]map[string][]float32
			var sets [2]map[string]any
			for i, src := range []string{srcs.dcm, srcs.nii} {
				base, _ := fitOnce(src, c.model, f.base)
				maps[i], sets[i] = fitOnce(src, c.model, append(append([]string(nil), f.base...), args...))
				if d := differing(base[f.changes+".nii.gz"], maps[i][f.changes+".nii.gz"]); d == 0 {
					t.Errorf("%s (%s): %s unchanged by the flag", name, []string{"DICOM", "NIfTI"}[i], f.changes)
				}
				for k, want := range f.record {
					if want == "B1" {
						want = srcs.b1
					}
					if got := sets[i][k]; fmt.Sprint(got) != fmt.Sprint(want) {
						t.Errorf("%s (%s): provenance %s = %v, want %v", name, []string{"DICOM", "NIfTI"}[i], k, got, want)
					}
				}
			}
			for stem, a := range maps[0] {
				if d := differing(a, maps[1][stem]); d != 0 || len(a) != len(maps[1][stem]) {
					t.Errorf("%s: %s differs between DICOM and NIfTI input in %d voxels", name, stem, d)
				}
			}
			if len(maps[0]) != len(maps[1]) {
				t.Errorf("%s: %d maps from DICOM, %d from NIfTI", name, len(maps[0]), len(maps[1]))
			}
			// Every setting of fit.RecordSettings, the same from both inputs.
			for _, o := range fit.ModelOptions {
				a, _ := json.Marshal(sets[0][o.Key])
				b, _ := json.Marshal(sets[1][o.Key])
				if _, ok := sets[1][o.Key]; (ok || o.Key == "offset") && string(a) != string(b) {
					t.Errorf("%s: provenance %s is %s from DICOM, %s from NIfTI", name, o.Key, a, b)
				}
			}
		}
	}
}

// differing counts the voxels whose values differ in bits.
func differing(a, b []float32) int {
	n := 0
	for i := range a {
		if i >= len(b) || math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			n++
		}
	}
	return n
}
