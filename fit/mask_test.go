package fit

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// TestRayleighMax: the distribution of the largest of n Rayleigh samples
// against closed forms. For n = 1 it is the Rayleigh distribution, whose
// median is σ·√(2 ln 2) (textbook: the Rayleigh CDF 1 − exp(−x²/2σ²),
// Henkelman 1985, Med Phys 12:232); the quantile inverts the CDF for any n.
func TestRayleighMax(t *testing.T) {
	if got, want := RayleighMaxQuantile(0.5, 1), math.Sqrt(2*math.Ln2); math.Abs(got-want) > 1e-12 {
		t.Errorf("Rayleigh median %v, want %v", got, want)
	}
	for _, n := range []int{1, 2, 5, 10, 30, 64} {
		for _, p := range []float64{1e-6, 0.25, 0.5, 0.75, 0.999, 1 - 1e-9} {
			x := RayleighMaxQuantile(p, n)
			if got := RayleighMaxCDF(x, n); math.Abs(got-p) > 1e-9*math.Max(p, 1e-3) {
				t.Errorf("n %d p %v: CDF(quantile) = %v", n, p, got)
			}
		}
	}
	// The threshold for 10 volumes: exp(−t²/2) = 1 − (1 − 10⁻³)^(1/10)
	// ≈ 10⁻⁴, t ≈ 4.29 σ (the value docs/methods.md quotes).
	if got := NoiseThreshold(1, 10); math.Abs(got-4.292) > 0.001 {
		t.Errorf("NoiseThreshold(1, 10) = %v, want 4.292", got)
	}
}

// maskScene returns n volumes of nx×ny×nz voxels: air (Rayleigh noise of
// σ) where air(v) is true, otherwise the amplitude amp(v, t) plus Rician
// noise.
func maskScene(nx, ny, nz, n int, sigma float64, seed uint64, amp func(v, t int) float64) *volume.Image {
	im := volume.New(nx, ny, nz, n)
	im.Acq = echoes(spacedTE(n, 10, 10))
	rng := rand.New(rand.NewPCG(seed, 11))
	nv := im.Voxels()
	for v := 0; v < nv; v++ {
		for t := 0; t < n; t++ {
			im.Data[t*nv+v] = float32(Rician(rng, amp(v, t), sigma))
		}
	}
	return im
}

// TestNoiseMask: an object whose material spans 8 σ to 100 σ beside air.
// The noise rule estimates σ within 2 %, keeps every voxel of the dim
// material (its true peak is 8 σ; the old Otsu rule drops it), and fits
// air at the designed rate AirRate (within 4 binomial standard
// deviations).
func TestNoiseMask(t *testing.T) {
	const sigma, n = 10.0, 8
	nx, ny, nz := 200, 200, 4
	object := func(v int) int { // 0 air, 1 dim, 2 bright
		i := v % nx
		switch {
		case i < 120:
			return 0
		case i < 140:
			return 1
		}
		return 2
	}
	im := maskScene(nx, ny, nz, n, sigma, 3, func(v, t int) float64 {
		switch object(v) {
		case 1:
			return 8 * sigma * math.Exp(-float64(t)/8)
		case 2:
			return 100 * sigma * math.Exp(-float64(t)/4)
		}
		return 0
	})
	m := AutoMaskOf(im)
	if m.Rule != "noise" {
		t.Fatalf("rule %q (%s), want noise", m.Rule, m.Why)
	}
	if math.Abs(m.Sigma/sigma-1) > 0.02 {
		t.Errorf("σ %v, want %v ± 2 %%", m.Sigma, sigma)
	}
	var p PeakHistogram
	peaks := p.Peaks(nil, im)
	var air, airIn, dim, dimIn, oldDim int
	for v, pk := range peaks {
		switch object(v) {
		case 0:
			air++
			if float64(pk) >= m.Threshold {
				airIn++
			}
		case 1:
			dim++
			if float64(pk) >= m.Threshold {
				dimIn++
			}
			if float64(pk) >= m.Otsu {
				oldDim++
			}
		}
	}
	if dimIn != dim {
		t.Errorf("dim material: %d of %d voxels kept", dimIn, dim)
	}
	if oldDim*2 > dim {
		t.Errorf("the old rule kept %d of %d dim voxels; the scene no longer shows its failure", oldDim, dim)
	}
	want := AirRate * float64(air)
	if sd := math.Sqrt(want); math.Abs(float64(airIn)-want) > 4*sd {
		t.Errorf("air fitted: %d of %d, want %.1f ± %.1f", airIn, air, want, 4*sd)
	}
	t.Logf("σ %.3f threshold %.2f; air fitted %d of %d (expected %.1f); dim kept %d of %d (old rule %d)", m.Sigma, m.Threshold, airIn, air, want, dimIn, dim, oldDim)
}

// TestNoiseMaskFallback: without usable air the old rule (half Otsu's
// threshold) applies and says why: an object that fills the grid, air set
// to zero. Air that is the root sum of squares of 4 coils (σ·χ with 8
// degrees of freedom, Constantinides et al. 1997, Magn Reson Med 38:852)
// passes for Rayleigh air of a larger σ; its lighter tail then makes the
// noise rule conservative: fewer air voxels than AirRate are fitted.
func TestNoiseMaskFallback(t *testing.T) {
	const sigma, n = 10.0, 6
	cases := map[string]func(v, t int) float64{
		"no air": func(v, t int) float64 { return float64(50+v%7*40) * sigma },
	}
	for name, amp := range cases {
		im := maskScene(60, 60, 2, n, sigma, 5, amp)
		m := AutoMaskOf(im)
		if m.Rule != "otsu" || m.Threshold != m.Otsu || m.Why == "" {
			t.Errorf("%s: %+v, want the otsu rule", name, m)
		}
	}
	// Zeroed air and sum-of-squares air.
	rng := rand.New(rand.NewPCG(9, 9))
	for _, name := range []string{"zeroed air", "sum of squares"} {
		air, airIn := 0, 0
		im := volume.New(100, 100, 2, n)
		im.Acq = echoes(spacedTE(n, 10, 10))
		nv := im.Voxels()
		for v := 0; v < nv; v++ {
			for k := 0; k < n; k++ {
				var s float64
				switch {
				case v%100 >= 50:
					s = Rician(rng, 60*sigma, sigma)
				case name == "sum of squares":
					for c := 0; c < 4; c++ {
						r := Rician(rng, 0, sigma)
						s += r * r
					}
					s = math.Sqrt(s)
				}
				im.Data[k*nv+v] = float32(s)
			}
		}
		m := AutoMaskOf(im)
		if name == "zeroed air" {
			if m.Rule != "otsu" || m.Threshold != m.Otsu {
				t.Errorf("%s: %+v, want the otsu rule", name, m)
			}
			continue
		}
		var p PeakHistogram
		for v, pk := range p.Peaks(nil, im) {
			if v%100 < 50 {
				air++
				if float64(pk) >= m.Threshold {
					airIn++
				}
			}
		}
		if m.Rule == "noise" && float64(airIn) > AirRate*float64(air) {
			t.Errorf("%s: %d of %d air voxels above %v, more than the rate %v", name, airIn, air, m.Threshold, AirRate)
		}
	}
}

// TestPeaksMaskHalves: PeaksMask of a large series, taken in two halves
// on two CPUs, gives exactly the mask of one pass over all the peaks
// (Raise, Add and Mask of one PeakHistogram), with air, tissue and −Inf
// peaks (what MaxInto leaves), for several sizes around the split.
func TestPeaksMaskHalves(t *testing.T) {
	r := rand.New(rand.NewPCG(9, 10))
	for _, n := range []int{1 << 18, 1<<18 + 1, 700_001} {
		peaks := make([]float32, n)
		for i := range peaks {
			switch k := r.IntN(1000); {
			case k < 4: // a voxel without a finite sample (ResetPeaks)
				peaks[i] = float32(math.Inf(-1))
			case k < 600:
				peaks[i] = float32(math.Abs(r.NormFloat64()) * 20) // air
			default:
				peaks[i] = float32(800 + 100*r.NormFloat64()) // tissue
			}
		}
		var one PeakHistogram
		one.Volumes = 12
		one.Raise(peaks)
		one.Add(peaks)
		if got, want := PeaksMask(peaks, 12), one.Mask(); got != want {
			t.Errorf("%d peaks: halves %+v, one pass %+v", n, got, want)
		}
	}
}

// TestMaxIntoHalves: the peaks taken in two halves at once equal those of
// MaxInto, element by element, with NaN, ±Inf and an odd length; and so
// do peaks whose first volume goes through StartPeaks or StartPeaksHalves
// on garbage (not reset) instead of ResetPeaks and MaxInto.
func TestMaxIntoHalves(t *testing.T) {
	r := rand.New(rand.NewPCG(13, 14))
	n := 1001
	one, two := ResetPeaks(make([]float32, n)), ResetPeaks(make([]float32, n))
	three, four := make([]float32, n), make([]float32, n)
	for i := range three {
		three[i], four[i] = float32(r.NormFloat64()*1e6), float32(math.NaN())
	}
	for k := range 5 {
		vol := make([]float32, n+3) // longer than the peaks, as a slab's volume may be
		for i := range vol {
			switch k := r.IntN(100); {
			case k == 0:
				vol[i] = float32(math.NaN())
			case k == 1:
				vol[i] = float32(math.Inf(1))
			case k == 2:
				vol[i] = float32(math.Inf(-1))
			default:
				vol[i] = float32(r.NormFloat64() * 100)
			}
		}
		MaxInto(one, vol)
		MaxIntoHalves(two, vol)
		if k == 0 {
			StartPeaks(three, vol)
			StartPeaksHalves(four, vol)
		} else {
			MaxInto(three, vol)
			MaxIntoHalves(four, vol)
		}
	}
	for i := range one {
		for _, p := range [][]float32{two, three, four} {
			if math.Float32bits(one[i]) != math.Float32bits(p[i]) {
				t.Fatalf("voxel %d: %v, one pass %v", i, p[i], one[i])
			}
		}
	}
}
