package fit

import (
	"context"
	"math"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// subSlab returns slices z0…z1−1 of im as an image of its own.
func subSlab(im *volume.Image, z0, z1 int) *volume.Image {
	nx, ny, nt := im.Dims[0], im.Dims[1], im.Dims[3]
	out := &volume.Image{Dims: [4]int{nx, ny, z1 - z0, nt}, Affine: im.Affine, Acq: im.Acq}
	nv := im.Voxels()
	for t := 0; t < nt; t++ {
		out.Data = append(out.Data, im.Data[t*nv+z0*nx*ny:t*nv+z1*nx*ny]...)
	}
	return out
}

// TestSlabsMatchWhole fits a series slab by slab, with the threshold from
// PeakHistogram and the maps reused between slabs, and requires the same
// bits as one Run over the whole series, for several slab sizes, worker
// counts and models (invariant: a voxel's fit depends on nothing else).
func TestSlabsMatchWhole(t *testing.T) {
	te := spacedTE(12, 10, 10)
	im := decaySeries(19, 13, 7, te, 10, 3)
	nv := im.Voxels()
	im.Data[4*nv+100] = float32(math.NaN())
	ir := subSlab(seriesOf(SeqInversionRecovery, irProtocol(), 10), 0, 2)
	ir.Dims[0], ir.Dims[1], ir.Dims[2] = 32, 32, 8 // same voxels, more slices
	for _, c := range []struct {
		m  Model
		im *volume.Image
	}{
		{&MonoExp{}, im}, {&MonoExp{Estimator: LogLinear}, im}, {&InversionRecovery{}, ir},
	} {
		whole, err := Run(context.Background(), c.im, c.m, &Options{Workers: 2})
		if err != nil {
			t.Fatal(err)
		}
		nz, plane := c.im.Dims[2], c.im.Dims[0]*c.im.Dims[1]
		for _, size := range []int{1, 2, 3, nz} {
			for _, workers := range []int{1, 3} {
				plan := PlanSlabs(nz, 1, int64(size))
				var ph PeakHistogram
				var peaks [][]float32
				for i := 0; i+1 < len(plan.Slabs); i++ {
					peaks = append(peaks, ph.Peaks(nil, subSlab(c.im, plan.Slabs[i], plan.Slabs[i+1])))
				}
				for _, p := range peaks {
					ph.Add(p)
				}
				thr := ph.Threshold()
				if thr != whole.Threshold {
					t.Fatalf("%s: slab threshold %v, whole %v", c.m.Name(), thr, whole.Threshold)
				}
				var maps *Maps
				var counts [NumStatus]int
				for i := 0; i+1 < len(plan.Slabs); i++ {
					z0, z1 := plan.Slabs[i], plan.Slabs[i+1]
					maps, err = RunTo(context.Background(), maps, subSlab(c.im, z0, z1), c.m, &Options{Workers: workers, Threshold: thr})
					if err != nil {
						t.Fatal(err)
					}
					for k := range maps.Values {
						for v := range maps.Values[k] {
							g := z0*plane + v
							if math.Float32bits(maps.Values[k][v]) != math.Float32bits(whole.Values[k][g]) ||
								math.Float32bits(maps.SE[k][v]) != math.Float32bits(whole.SE[k][g]) {
								t.Fatalf("%s slab size %d workers %d: output %d voxel %d differs", c.m.Name(), size, workers, k, g)
							}
						}
					}
					for v := range maps.Status {
						g := z0*plane + v
						if maps.Status[v] != whole.Status[g] || math.Float32bits(maps.R2[v]) != math.Float32bits(whole.R2[g]) {
							t.Fatalf("%s: voxel %d status/R² differ", c.m.Name(), g)
						}
					}
					for s, n := range maps.Counts {
						counts[s] += n
					}
				}
				if counts != whole.Counts {
					t.Fatalf("%s: counts %v, whole %v", c.m.Name(), counts, whole.Counts)
				}
			}
		}
	}
}

// TestPeakHistogramMatchesAutoThreshold checks the streamed threshold and
// noise estimate against the whole-image functions on images with air,
// NaN, Inf and an all-dark case.
func TestPeakHistogramMatchesAutoThreshold(t *testing.T) {
	te := spacedTE(8, 10, 10)
	im := decaySeries(21, 11, 6, te, 15, 9)
	nv := im.Voxels()
	im.Data[2*nv+7] = float32(math.Inf(1))
	im.Data[3*nv+8] = float32(math.NaN())
	dark := volume.New(4, 4, 3, 2)
	for _, x := range []*volume.Image{im, dark} {
		want := AutoThreshold(x)
		for _, size := range []int{1, 2, 4} {
			plan := PlanSlabs(x.Dims[2], 1, int64(size))
			var ph PeakHistogram
			var bg Background
			var parts [][]float32
			for i := 0; i+1 < len(plan.Slabs); i++ {
				parts = append(parts, ph.Peaks(nil, subSlab(x, plan.Slabs[i], plan.Slabs[i+1])))
			}
			for _, p := range parts {
				ph.Add(p)
			}
			if got := ph.Threshold(); got != want {
				t.Fatalf("slab size %d: threshold %v, AutoThreshold %v", size, got, want)
			}
			for i := 0; i+1 < len(plan.Slabs); i++ {
				bg.Add(subSlab(x, plan.Slabs[i], plan.Slabs[i+1]), want)
			}
			ws, wok := BackgroundSigma(x, want)
			gs, gok := bg.Sigma()
			if ws != gs || wok != gok {
				t.Fatalf("slab size %d: sigma %v %v, BackgroundSigma %v %v", size, gs, gok, ws, wok)
			}
		}
	}
}

func TestPlanSlabs(t *testing.T) {
	for _, c := range []struct {
		nz             int
		per, budget    int64
		want           []int
		slicesPerSlice int
	}{
		{10, 100, 1000, []int{0, 10}, 10},
		{10, 100, 350, []int{0, 3, 6, 9, 10}, 3},
		{10, 100, 500, []int{0, 5, 10}, 5},
		{10, 100, 10, []int{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, 1},
		{200, 43 << 20, 1 << 30, []int{0, 23, 46, 69, 92, 115, 138, 161, 184, 200}, 23},
	} {
		p := PlanSlabs(c.nz, c.per, c.budget)
		if len(p.Slabs) != len(c.want) || p.Slices != c.slicesPerSlice {
			t.Fatalf("PlanSlabs(%d, %d, %d) = %v", c.nz, c.per, c.budget, p)
		}
		for i := range p.Slabs {
			if p.Slabs[i] != c.want[i] {
				t.Fatalf("PlanSlabs(%d, %d, %d) = %v, want %v", c.nz, c.per, c.budget, p.Slabs, c.want)
			}
		}
	}
}
