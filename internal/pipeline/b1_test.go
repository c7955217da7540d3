package pipeline_test

import (
	"context"
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// TestB1CorrectsVFA (issue 17 Must-show): a transmit field from B1 = 0.6
// to 1.4 (nine bands along x) over three T1 values (600, 1000, 1400 ms
// along y). A double-angle series (60°/120°, TR 10 s) and an AFI series
// (60°, TR 20/100 ms) at SNR 100 are fitted by the pipeline into TB1map;
// a VFA series (2–30°, TR 15 ms, SNR 100 at B1 = 1) of the same object is
// fitted with `--b1` set to each map and without. In every band and T1
// the mean corrected T1 is within 2 % of the truth, while the uncorrected
// one is off by more than 10 % wherever |B1 − 1| ≥ 0.1 (about B1²:
// check-values §1.1, §2.4). Signals: fit.Signal (spoiled gradient echo,
// Ernst), fit.DAMSignal and fit.AFISignal (checked against numpy in
// fit.TestB1References).
func TestB1CorrectsVFA(t *testing.T) {
	const band, nx, ny, nz = 8, 9 * 8, 15, 4
	b1Of := func(i int) float64 { return 0.6 + 0.1*float64(i/band) }
	t1Of := func(j int) float64 { return []float64{600, 1000, 1400}[j/5] }
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(5, 6))
	write := func(name string, acq []volume.Acquisition, sig func(i, j, k int) []float64, sigma float64) string {
		im := volume.New(nx, ny, nz, len(acq))
		im.Acq = acq
		nv := im.Voxels()
		for k := 0; k < nz; k++ {
			for j := 0; j < ny; j++ {
				for i := 0; i < nx; i++ {
					for t, s := range sig(i, j, k) {
						im.Data[t*nv+i+nx*(j+ny*k)] = float32(fit.Rician(rng, s, sigma))
					}
				}
			}
		}
		p := filepath.Join(dir, name+".nii.gz")
		if err := series.Write(p, im, nil); err != nil {
			t.Fatal(err)
		}
		return p
	}
	acqOf := func(n int, set func(i int, a *volume.Acquisition)) []volume.Acquisition {
		acq := make([]volume.Acquisition, n)
		for i := range acq {
			acq[i] = volume.Unknown()
			set(i, &acq[i])
		}
		return acq
	}
	// run fits src with model (and the B1 map b1 when not "") into
	// dir/out and returns the first map.
	run := func(src, model, b1, out string) *volume.Image {
		out = filepath.Join(dir, out)
		c := &pipeline.Config{Series: src, Spec: fit.Spec{Model: model}, B1: b1, NoMask: true, Workers: 2, NoPreview: true, Out: out, Version: "test"}
		if _, err := pipeline.Run(context.Background(), c, nil); err != nil {
			t.Fatal(err)
		}
		m, _ := fit.New(fit.Spec{Model: model})
		im, err := nifti.Read(filepath.Join(out, m.Outputs()[0].Map+".nii.gz"))
		if err != nil {
			t.Fatal(err)
		}
		return im
	}
	// The B1 series, SNR 100: σ is the brighter image's signal at B1 = 1
	// (and, for DAM, T1 → 0) over 100.
	s1, s2 := fit.DAMSignal(1000, 1, 60)
	dam := write("dam", acqOf(2, func(i int, a *volume.Acquisition) {
		a.FlipAngle, a.RepetitionTime, a.EchoTime = 60*float64(i+1), 10000, 2
	}),
		func(i, j, k int) []float64 {
			x := fit.Tissue{PD: 1000, T1: t1Of(j), T2: 1e9, T2star: 1e9}
			return []float64{fit.Signal(fit.SeqGradientEcho, x, 2, math.NaN(), 10000, 60*b1Of(i), 1), fit.Signal(fit.SeqGradientEcho, x, 2, math.NaN(), 10000, 120*b1Of(i), 1)}
		}, math.Max(s1, s2)/100)
	a1, a2 := fit.AFISignal(1000, 1000, 20, 100, 1, 60)
	afi := write("afi", acqOf(2, func(i int, a *volume.Acquisition) {
		a.FlipAngle, a.RepetitionTime, a.EchoTime = 60, []float64{20, 100}[i], 2
	}),
		func(i, j, k int) []float64 {
			x, y := fit.AFISignal(1000, t1Of(j), 20, 100, b1Of(i), 60)
			return []float64{x, y}
		}, math.Max(a1, a2)/100)
	fa := []float64{2, 5, 10, 15, 20, 30}
	vfaMax := 0.0
	for _, a := range fa {
		vfaMax = math.Max(vfaMax, fit.Signal(fit.SeqGradientEcho, fit.Tissue{PD: 1000, T1: 1000, T2: 1e9, T2star: 1e9}, 2, math.NaN(), 15, a, 1))
	}
	vfa := write("vfa", acqOf(len(fa), func(i int, a *volume.Acquisition) { a.FlipAngle, a.RepetitionTime, a.EchoTime = fa[i], 15, 2 }),
		func(i, j, k int) []float64 {
			y := make([]float64, len(fa))
			for t, a := range fa {
				y[t] = fit.Signal(fit.SeqGradientEcho, fit.Tissue{PD: 1000, T1: t1Of(j), T2: 1e9, T2star: 1e9}, 2, math.NaN(), 15, a*b1Of(i), 1)
			}
			return y
		}, vfaMax/100)

	plain := run(vfa, "t1-vfa", "", "vfa-plain")
	for _, model := range []string{"b1-dam", "b1-afi"} {
		src := map[string]string{"b1-dam": dam, "b1-afi": afi}[model]
		b1map := run(src, model, "", model)
		corrected := run(vfa, "t1-vfa", filepath.Join(dir, model, "TB1map.nii.gz"), "vfa-"+model)
		for b := 0; b < 9; b++ {
			for tb := 0; tb < 3; tb++ {
				var sb, sc, sp, n float64
				for k := 0; k < nz; k++ {
					for j := 5 * tb; j < 5*tb+5; j++ {
						for i := band * b; i < band*(b+1); i++ {
							v := i + nx*(j+ny*k)
							sb += float64(b1map.Data[v]) / 100
							sc += float64(corrected.Data[v])
							sp += float64(plain.Data[v])
							n++
						}
					}
				}
				b1, t1 := b1Of(band*b), t1Of(5*tb)
				ec, ep := sc/n/t1-1, sp/n/t1-1
				t.Logf("%s B1 %.1f T1 %4.0f: B1 map %.4f, T1 corrected %.1f (%+.2f %%), uncorrected %.1f (%+.1f %%)", model, b1, t1, sb/n, sc/n, 100*ec, sp/n, 100*ep)
				if math.IsNaN(ec) || math.Abs(ec) > 0.02 {
					t.Errorf("%s B1 %.1f T1 %v: corrected T1 off by %.2f %%", model, b1, t1, 100*ec)
				}
				if math.Abs(b1-1) > 0.05 && !(math.Abs(ep) > 0.10) {
					t.Errorf("B1 %.1f T1 %v: uncorrected T1 only %.2f %% off; the test shows no correction", b1, t1, 100*ep)
				}
			}
		}
	}
}
