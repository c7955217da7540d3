package pipeline_test

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/bids"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/roi/phantom"
	"github.com/tauvox/tauvox/volume"
)

// maskPhantom is an invented 11-vial phantom whose T1 spans 100–2500 ms in
// a gel of T1 1200 ms; vial T1 = 1010 ms is at its null at TI 700 ms
// (TI = T1·ln 2 for a full inversion and TR ≫ T1). The proton densities
// vary from 0.6 to 1.
func maskPhantom() *phantom.Definition {
	t1 := []float64{100, 160, 250, 380, 560, 800, 1010, 1300, 1700, 2100, 2500}
	d := &phantom.Definition{Format: phantom.FormatV1, Name: "mask test phantom (invented)",
		Body: &phantom.Body{Radius: 95, Length: 200, FillT1: 1200, FillT2: 90, FillPD: 1}}
	for i, v := range t1 {
		a := 2 * math.Pi * float64(i) / float64(len(t1))
		row := func(x float64) []phantom.Row {
			return []phantom.Row{{Field: 1.5, Temperature: 20, Value: x, Uncertainty: 1}}
		}
		d.Vials = append(d.Vials, phantom.Vial{ID: fmt.Sprintf("V%02d", i+1), X: 62 * math.Cos(a), Y: 62 * math.Sin(a), Radius: 11,
			PD: 0.6 + 0.4*float64(i%3)/2, Reference: map[string][]phantom.Row{"T1": row(v), "T2": row(math.Min(0.5*v, 400))}})
	}
	return d
}

// maskCase is one protocol of the mask test.
type maskCase struct {
	model, suffix, index string
	seq                  fit.Sequence
	acq                  []volume.Acquisition
}

func maskCases() []maskCase {
	fa := []float64{2, 5, 10, 15, 20, 25, 30}
	vfa := make([]volume.Acquisition, len(fa))
	for i := range vfa {
		vfa[i] = volume.Unknown()
		vfa[i].FlipAngle, vfa[i].RepetitionTime, vfa[i].EchoTime = fa[i], 15, 2
	}
	ti := []float64{50, 100, 200, 400, 700, 1100, 1800, 3200}
	ir := make([]volume.Acquisition, len(ti))
	for i := range ir {
		ir[i] = volume.Unknown()
		ir[i].InversionTime, ir[i].RepetitionTime, ir[i].EchoTime, ir[i].FlipAngle = ti[i], 8000, 10, 90
	}
	return []maskCase{
		{"t1-vfa", "VFA", "flip", fit.SeqGradientEcho, vfa},
		{"t1-ir", "IRT1", "inv", fit.SeqInversionRecovery, ir},
	}
}

// maskSeries returns the noiseless and the noisy series of the case, the
// noise SD set so that the gel's largest signal is 60 σ.
func maskSeries(t *testing.T, c maskCase) (truth, noisy *volume.Image, sigma float64) {
	t.Helper()
	sc := &phantom.Scene{Def: maskPhantom(), Slices: 4, Sigma: -1}
	truth, err := sc.Series(c.seq, c.acq)
	if err != nil {
		t.Fatal(err)
	}
	gel := 0.0
	for _, a := range c.acq {
		gel = math.Max(gel, 1000*fit.Signal(c.seq, fit.Tissue{PD: 1, T1: 1200, T2: 90, T2star: 1 / (1.0/90 + 0.015)},
			a.EchoTime, a.InversionTime, a.RepetitionTime, a.FlipAngle, 1))
	}
	sigma = gel / 60
	sc.Sigma, sc.Seed = sigma, 17
	if noisy, err = sc.Series(c.seq, c.acq); err != nil {
		t.Fatal(err)
	}
	return truth, noisy, sigma
}

// maskCount counts, from the truth, the object voxels (true signal above
// 5 σ in at least one volume) and the air voxels (no signal in any
// volume), how many of each the mask kept (any status but masked) and how
// many object voxels have status ok.
func maskCount(truth *volume.Image, status []float32, sigma float64) (obj, objIn, objOK, air, airIn int) {
	nv := truth.Voxels()
	for v := 0; v < nv; v++ {
		peak := 0.0
		for k := 0; k < truth.Volumes(); k++ {
			peak = math.Max(peak, float64(truth.Data[k*nv+v]))
		}
		in := status[v] != float32(fit.Masked)
		switch {
		case peak > 5*sigma:
			obj++
			if in {
				objIn++
			}
			if status[v] == float32(fit.OK) {
				objOK++
			}
		case peak == 0:
			air++
			if in {
				airIn++
			}
		}
	}
	return
}

// airLimit is the largest count of air voxels fitted that the designed
// rate fit.AirRate allows for n air voxels: the mean plus four binomial
// standard deviations.
func airLimit(n int) float64 {
	m := fit.AirRate * float64(n)
	return m + 4*math.Sqrt(m) + 1
}

// TestAutoMaskPhantom (issue 17 Must-show): on a VFA series (flip angles
// 2–30°, TR 15 ms) and an IR series (one vial at its null at TI 700 ms)
// of a phantom whose vials span T1 100–2500 ms, with SNR 60 in the gel,
// the automatic mask fits ≥ 99 % of the voxels whose true signal is above
// 5 σ in at least one volume, and no more air voxels than the designed
// rate allows. The series is fitted whole (in memory), slab by slab from
// a NIfTI file (the same status map, bit for bit), and by a BIDS batch.
func TestAutoMaskPhantom(t *testing.T) {
	for _, c := range maskCases() {
		t.Run(c.model, func(t *testing.T) {
			truth, noisy, sigma := maskSeries(t, c)
			dir := t.TempDir()
			out := filepath.Join(dir, "maps")
			cfg := &pipeline.Config{Image: noisy, Series: c.model, Spec: fit.Spec{Model: c.model}, Workers: 2, NoPreview: true, Out: out, Version: "test"}
			if _, err := pipeline.Run(context.Background(), cfg, nil); err != nil {
				t.Fatal(err)
			}
			status := readStatus(t, filepath.Join(out, "status.nii.gz"))
			obj, objIn, objOK, air, airIn := maskCount(truth, status, sigma)
			m := fit.AutoMaskOf(noisy)
			// The old rule (half Otsu's threshold), for the record.
			var ph fit.PeakHistogram
			oldOK := 0
			nv := truth.Voxels()
			for v, pk := range ph.Peaks(nil, noisy) {
				tp := 0.0
				for k := 0; k < truth.Volumes(); k++ {
					tp = math.Max(tp, float64(truth.Data[k*nv+v]))
				}
				if tp > 5*sigma && float64(pk) >= m.Otsu {
					oldOK++
				}
			}
			t.Logf("σ %.3f (estimated %.3f, rule %s), threshold %.2f = %.2f σ; object %d of %d in the mask (%.2f %%; half-Otsu rule %d), %d ok (%.2f %%); air %d of %d in the mask (expected %.1f)",
				sigma, m.Sigma, m.Rule, m.Threshold, m.Threshold/sigma, objIn, obj, 100*float64(objIn)/float64(obj), oldOK, objOK, 100*float64(objOK)/float64(obj), airIn, air, fit.AirRate*float64(air))
			var byStatus [fit.NumStatus]int
			for v := range status {
				tp := 0.0
				for k := 0; k < truth.Volumes(); k++ {
					tp = math.Max(tp, float64(truth.Data[k*nv+v]))
				}
				if tp > 5*sigma && status[v] != float32(fit.OK) {
					byStatus[int(status[v])]++
				}
			}
			t.Logf("object voxels not ok, by status: %v", byStatus)
			if m.Rule != "noise" || math.Abs(m.Sigma/sigma-1) > 0.05 {
				t.Errorf("rule %s σ %v, want noise and %v ± 5 %%", m.Rule, m.Sigma, sigma)
			}
			if float64(objIn) < 0.99*float64(obj) || float64(objOK) < 0.99*float64(obj) {
				t.Errorf("object: %d of %d voxels in the mask, %d ok; want ≥ 99 %%", objIn, obj, objOK)
			}
			if float64(airIn) > airLimit(air) {
				t.Errorf("air: %d of %d voxels in the mask, more than the rate %v allows (%.1f)", airIn, air, fit.AirRate, airLimit(air))
			}

			// From a NIfTI file, slab by slab: the same status map.
			src := filepath.Join(dir, "series.nii.gz")
			if err := series.Write(src, noisy, nil); err != nil {
				t.Fatal(err)
			}
			out2 := filepath.Join(dir, "maps2")
			cfg2 := &pipeline.Config{Series: src, Spec: fit.Spec{Model: c.model}, Workers: 2, NoPreview: true, Out: out2, Version: "test",
				Memory: 300 << 10}
			sum, err := pipeline.Run(context.Background(), cfg2, nil)
			if err != nil {
				t.Fatal(err)
			}
			if sum.Slabs < 2 {
				t.Errorf("%d slab; the test wants several", sum.Slabs)
			}
			status2 := readStatus(t, filepath.Join(out2, "status.nii.gz"))
			for v := range status {
				if status[v] != status2[v] {
					t.Fatalf("voxel %d: status %v whole, %v slab by slab", v, status[v], status2[v])
				}
			}

			// batch: one 3-D file per volume in a BIDS dataset.
			raw := filepath.Join(dir, "raw")
			anat := filepath.Join(raw, "sub-01", "anat")
			if err := os.MkdirAll(anat, 0o755); err != nil {
				t.Fatal(err)
			}
			os.WriteFile(filepath.Join(raw, "dataset_description.json"), []byte(`{"Name": "mask test", "BIDSVersion": "1.9.0"}`), 0o644)
			for k := 0; k < noisy.Volumes(); k++ {
				vol := &volume.Image{Dims: [4]int{noisy.Dims[0], noisy.Dims[1], noisy.Dims[2], 1}, Data: noisy.Data[k*nv : (k+1)*nv],
					Affine: noisy.Affine, Acq: noisy.Acq[k : k+1], Source: noisy.Source}
				name := fmt.Sprintf("sub-01_%s-%d_%s.nii.gz", c.index, k+1, c.suffix)
				if err := series.Write(filepath.Join(anat, name), vol, nil); err != nil {
					t.Fatal(err)
				}
			}
			ds, err := bids.Scan(raw, &bids.ScanOptions{Suffixes: []string{c.suffix}})
			if err != nil {
				t.Fatal(err)
			}
			jobs, err := pipeline.Plan(ds, filepath.Join(dir, "deriv"), map[string]string{c.suffix: c.model})
			if err != nil || len(jobs) != 1 {
				t.Fatalf("plan: %d jobs, %v", len(jobs), err)
			}
			if _, err := jobs[0].Run(context.Background(), 2, "test"); err != nil {
				t.Fatal(err)
			}
			names, _ := filepath.Glob(filepath.Join(jobs[0].Pub.Dir, "*status.nii.gz"))
			if len(names) != 1 {
				t.Fatalf("batch status maps: %v", names)
			}
			status3 := readStatus(t, names[0])
			_, objIn3, objOK3, _, airIn3 := maskCount(truth, status3, sigma)
			if objIn3 != objIn || objOK3 != objOK || airIn3 != airIn {
				t.Errorf("batch: object %d in the mask (%d ok), air %d; fit: %d (%d), %d", objIn3, objOK3, airIn3, objIn, objOK, airIn)
			}
		})
	}
}

func readStatus(t *testing.T, path string) []float32 {
	t.Helper()
	im, err := nifti.Read(path)
	if err != nil {
		t.Fatal(err)
	}
	return im.Data
}
