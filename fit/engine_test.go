package fit

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// decaySeries makes an nx×ny×nz series of n echoes whose voxels have T2
// varying smoothly from 20 to 300 ms, Rician noise of SD sigma, and a dark
// border (air) of width 2.
func decaySeries(nx, ny, nz int, te []float64, sigma float64, seed uint64) *volume.Image {
	im := volume.New(nx, ny, nz, len(te))
	im.Acq = echoes(te)
	rng := rand.New(rand.NewPCG(seed, 7))
	nv := im.Voxels()
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				v := i + nx*(j+ny*k)
				air := i < 2 || j < 2 || i >= nx-2 || j >= ny-2
				t2 := 20 + 280*float64(v%97)/96
				for t, x := range te {
					a := 1000 * math.Exp(-x/t2)
					if air {
						a = 0
					}
					im.Data[t*nv+v] = float32(Rician(rng, a, sigma))
				}
			}
		}
	}
	return im
}

func TestRunDeterministicAcrossWorkers(t *testing.T) {
	te := spacedTE(12, 10, 10)
	im := decaySeries(23, 17, 5, te, 10, 1)
	// Holes: one voxel with a NaN echo, one all NaN, one with Inf.
	nv := im.Voxels()
	im.Data[3*nv+200] = float32(math.NaN())
	for t := range te {
		im.Data[t*nv+201] = float32(math.NaN())
	}
	im.Data[5*nv+202] = float32(math.Inf(1))
	for _, m := range []Model{&MonoExp{}, &MonoExp{Estimator: LogLinear}, &MonoExp{Offset: true}} {
		ref, err := Run(context.Background(), im, m, &Options{Workers: 1})
		if err != nil {
			t.Fatal(err)
		}
		// The peaks of the survey (Options.Peaks) mask the air without
		// its samples: the same maps bit for bit.
		var ph PeakHistogram
		peaks := ph.Peaks(nil, im)
		for _, w := range []int{2, 3, 8, -2} {
			opt := &Options{Workers: w}
			if w < 0 {
				opt = &Options{Workers: -w, Peaks: peaks}
			}
			got, err := Run(context.Background(), im, m, opt)
			if err != nil {
				t.Fatal(err)
			}
			for k := range ref.Values {
				for v := range ref.Values[k] {
					a, b := ref.Values[k][v], got.Values[k][v]
					if math.Float32bits(a) != math.Float32bits(b) {
						t.Fatalf("%s: workers %d output %d voxel %d: %v != %v", m.Method(), w, k, v, b, a)
					}
				}
			}
			for v := range ref.Status {
				if ref.Status[v] != got.Status[v] || math.Float32bits(ref.R2[v]) != math.Float32bits(got.R2[v]) {
					t.Fatalf("workers %d voxel %d: status/R² differ", w, v)
				}
			}
			if got.Counts != ref.Counts {
				t.Fatalf("counts %v != %v", got.Counts, ref.Counts)
			}
		}
		if s := Status(ref.Status[201]); s != TooFewPoints {
			t.Errorf("all-NaN voxel: status %v", s)
		}
		for _, v := range []int{200, 202} {
			if s := Status(ref.Status[v]); s != OK {
				t.Errorf("voxel %d with one bad echo: status %v, want ok (fitted on the rest)", v, s)
			}
		}
		if ref.Counts[Masked] == 0 || ref.Counts[OK] < nv/2 {
			t.Errorf("counts %v: the air border should be masked and the rest fitted", ref.Counts)
		}
		// Every masked or failed voxel is NaN, never 0.
		for v, s := range ref.Status {
			if Status(s) != OK && !math.IsNaN(float64(ref.Values[0][v])) {
				t.Fatalf("voxel %d status %v has value %v", v, Status(s), ref.Values[0][v])
			}
		}
	}
}

func TestRunMaskAndErrors(t *testing.T) {
	te := spacedTE(6, 10, 10)
	im := decaySeries(8, 8, 2, te, 5, 2)
	mask := make([]bool, im.Voxels())
	mask[27] = true
	maps, err := Run(context.Background(), im, &MonoExp{}, &Options{Mask: mask})
	if err != nil {
		t.Fatal(err)
	}
	if maps.Counts[Masked] != im.Voxels()-1 || Status(maps.Status[27]) != OK {
		t.Errorf("counts %v, status of the one voxel %v", maps.Counts, Status(maps.Status[27]))
	}
	if _, err := Run(context.Background(), im, &MonoExp{}, &Options{Mask: mask[:10]}); err == nil {
		t.Error("short mask accepted")
	}
	if _, err := Run(context.Background(), im, &MonoExp{}, &Options{Peaks: make([]float32, 10)}); err == nil {
		t.Error("peaks of the wrong length accepted")
	}
	// With a mask, the peaks do not decide: the mask does.
	peaks := make([]float32, im.Voxels()) // all 0: below any threshold
	maps, err = Run(context.Background(), im, &MonoExp{}, &Options{Mask: mask, Threshold: 1e-6, Peaks: peaks})
	if err != nil || Status(maps.Status[27]) != OK {
		t.Errorf("mask with peaks: %v, status %v", err, Status(maps.Status[27]))
	}
	bad := *im
	bad.Acq = echoes([]float64{10, 20, 30, 40, 50, math.NaN()})
	if _, err := Run(context.Background(), &bad, &MonoExp{}, nil); !errors.Is(err, ErrProtocol) {
		t.Errorf("missing TE: %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Run(ctx, im, &MonoExp{}, nil); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled run: %v", err)
	}
}

func TestAutoThreshold(t *testing.T) {
	// Object at 1000, air Rayleigh noise with σ = 10 (a ring of 240 air
	// voxels): the noise rule applies, and the threshold is
	// NoiseThreshold(σ, 2) ≈ 39 within 10 %, far below the object (≥ 600).
	im := decaySeries(32, 32, 1, []float64{10, 20}, 10, 3)
	thr := AutoThreshold(im)
	if m := AutoMaskOf(im); m.Rule != "noise" {
		t.Fatalf("rule %q (%s), want noise", m.Rule, m.Why)
	}
	if want := NoiseThreshold(10, 2); math.Abs(thr/want-1) > 0.1 {
		t.Errorf("threshold %g, want %g ± 10 %%", thr, want)
	}
}

func benchmarkRun(b *testing.B, m Model, im *volume.Image, workers int) {
	opt := &Options{Workers: workers, NoThreshold: true}
	var maps *Maps
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		var err error
		maps, err = Run(context.Background(), im, m, opt)
		if err != nil {
			b.Fatal(err)
		}
	}
	b.StopTimer()
	sinkMaps = maps
	nv := float64(im.Voxels())
	b.ReportMetric(nv*float64(b.N)/b.Elapsed().Seconds(), "voxels/s")
	b.ReportMetric(float64(testing.AllocsPerRun(1, func() { Run(context.Background(), im, m, opt) }))/nv, "allocs/voxel")
}

var sinkMaps *Maps

var benchT2Series *volume.Image

func t2BenchSeries() *volume.Image {
	if benchT2Series == nil {
		benchT2Series = decaySeries(64, 64, 32, spacedTE(16, 10, 10), 10, 9)
	}
	return benchT2Series
}

func BenchmarkRunT2LogLinear(b *testing.B) {
	benchmarkRun(b, &MonoExp{Estimator: LogLinear}, t2BenchSeries(), 2)
}
func BenchmarkRunT2NLLS(b *testing.B) { benchmarkRun(b, &MonoExp{}, t2BenchSeries(), 2) }
func BenchmarkRunT2NLLSOffset(b *testing.B) {
	benchmarkRun(b, &MonoExp{Offset: true}, t2BenchSeries(), 2)
}
func BenchmarkRunT2NLLSRician(b *testing.B) { benchmarkRun(b, &MonoExp{Sigma: 10}, t2BenchSeries(), 2) }

// BenchmarkRunT2Gonum measures the gonum cross-check path on a smaller
// series (it is about two orders of magnitude slower).
func BenchmarkRunT2Gonum(b *testing.B) {
	im := decaySeries(32, 32, 2, spacedTE(16, 10, 10), 10, 9)
	benchmarkRun(b, &MonoExp{Solver: Gonum}, im, 2)
}

// benchmarkFitter fits pre-generated voxels one after another on one core.
func benchmarkFitter(b *testing.B, m Model, acq []volume.Acquisition, voxels [][]float64) {
	benchT1(b, m, acq, voxels, nil)
}

func t2Voxels(te []float64, n int) [][]float64 {
	rng := rand.New(rand.NewPCG(5, 6))
	out := make([][]float64, n)
	for k := range out {
		t2 := 20 + 280*rng.Float64()
		y := make([]float64, len(te))
		for i, x := range te {
			y[i] = Rician(rng, 1000*math.Exp(-x/t2), 10)
		}
		out[k] = y
	}
	return out
}

func BenchmarkFitT2LogLinear16(b *testing.B) {
	te := spacedTE(16, 10, 10)
	benchmarkFitter(b, &MonoExp{Estimator: LogLinear}, echoes(te), t2Voxels(te, 1024))
}

func BenchmarkFitT2NLLS16(b *testing.B) {
	te := spacedTE(16, 10, 10)
	benchmarkFitter(b, &MonoExp{}, echoes(te), t2Voxels(te, 1024))
}

// TestBackgroundSigma: air of a series with σ = 10 gives σ back within 3%
// (Rayleigh mean σ·√(π/2), Henkelman 1985).
func TestBackgroundSigma(t *testing.T) {
	im := decaySeries(64, 64, 2, []float64{10, 20, 30}, 10, 4)
	s, ok := BackgroundSigma(im, AutoThreshold(im))
	if !ok || math.Abs(s-10) > 0.3 {
		t.Errorf("σ = %g (%v), want 10", s, ok)
	}
}

// seriesOf makes a 64×64×32 series of sequence seq with T1 spread over
// 200–2500 ms, T2 = 80 ms and Rician noise σ (of a fully relaxed 1000).
func seriesOf(seq Sequence, acq []volume.Acquisition, sigma float64) *volume.Image {
	im := volume.New(64, 64, 32, len(acq))
	im.Acq = acq
	rng := rand.New(rand.NewPCG(21, 22))
	nv := im.Voxels()
	for v := 0; v < nv; v++ {
		x := Tissue{PD: 1, T1: 200 + 2300*float64(v%101)/100, T2: 80}
		for t, a := range acq {
			s := 1000 * Signal(seq, x, a.EchoTime, a.InversionTime, a.RepetitionTime, a.FlipAngle, 0)
			im.Data[t*nv+v] = float32(Rician(rng, s, sigma))
		}
	}
	return im
}

func irProtocol() []volume.Acquisition {
	ti := []float64{50, 100, 200, 400, 800, 1600, 3200, 6000}
	acq := make([]volume.Acquisition, len(ti))
	for i := range acq {
		acq[i] = volume.Unknown()
		acq[i].InversionTime, acq[i].RepetitionTime = ti[i], 10000
	}
	return acq
}

func vfaProtocol() []volume.Acquisition {
	fa := []float64{2, 5, 10, 15, 20, 30}
	acq := make([]volume.Acquisition, len(fa))
	for i := range acq {
		acq[i] = volume.Unknown()
		acq[i].FlipAngle, acq[i].RepetitionTime = fa[i], 15
	}
	return acq
}

var runIR, runVFA *volume.Image

func BenchmarkRunT1IR8(b *testing.B) {
	if runIR == nil {
		runIR = seriesOf(SeqInversionRecovery, irProtocol(), 10)
	}
	benchmarkRun(b, &InversionRecovery{}, runIR, 2)
}

func BenchmarkRunT1VFALinear(b *testing.B) {
	if runVFA == nil {
		runVFA = seriesOf(SeqGradientEcho, vfaProtocol(), 1)
	}
	benchmarkRun(b, &VariableFlipAngle{}, runVFA, 2)
}

func BenchmarkRunT1VFANLLS(b *testing.B) {
	if runVFA == nil {
		runVFA = seriesOf(SeqGradientEcho, vfaProtocol(), 1)
	}
	benchmarkRun(b, &VariableFlipAngle{Estimator: NLLS}, runVFA, 2)
}
