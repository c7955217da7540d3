package fit

import (
	"context"
	"math"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// TestNoNumberWithoutData: a voxel with no signal (every finite sample 0),
// fitted with the automatic threshold, a user threshold or none at all,
// never gets status ok — before, the solver's starting point came out as
// T2 = 81 ms "ok" for a series of zeros. A B1 map value that is not a
// usable relative transmit field (≤ 0, NaN, ±Inf, beyond MaxB1) gives
// BadB1 instead of a fit with a wrong or missing correction; values at the
// bounds are fitted.
func TestNoNumberWithoutData(t *testing.T) {
	te := spacedTE(8, 10, 10)
	im := decaySeries(6, 6, 1, te, 0, 1)
	nv := im.Voxels()
	zero := 2 + 6*2 // a voxel inside the border
	for k := range te {
		im.Data[k*nv+zero] = 0
	}
	allZero := decaySeries(6, 6, 1, te, 0, 1)
	for i := range allZero.Data {
		allZero.Data[i] = 0
	}
	for _, tc := range []struct {
		name string
		im   *volume.Image
		opt  Options
		vox  []int
		want Status
	}{
		{"auto threshold, one empty voxel", im, Options{}, []int{zero}, Masked},
		{"no threshold, one empty voxel", im, Options{NoThreshold: true}, []int{zero, 0}, NoSignal},
		{"no threshold, series of zeros", allZero, Options{NoThreshold: true}, []int{0, zero, nv - 1}, NoSignal},
		{"auto threshold, series of zeros", allZero, Options{}, []int{0, zero, nv - 1}, NoSignal},
	} {
		for _, m := range []Model{&MonoExp{}, &MonoExp{Estimator: LogLinear}, &MonoExp{Offset: true}} {
			res, err := Run(context.Background(), tc.im, m, &tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			for _, v := range tc.vox {
				if s := Status(res.Status[v]); s != tc.want || !math.IsNaN(float64(res.Values[0][v])) {
					t.Errorf("%s, %s: voxel %d status %v, T2 %v; want %v and NaN", tc.name, m.Method(), v, s, res.Values[0][v], tc.want)
				}
			}
			if tc.im == allZero && res.Counts[OK] != 0 {
				t.Errorf("%s, %s: %d voxels ok in a series of zeros", tc.name, m.Method(), res.Counts[OK])
			}
		}
	}

	// B1: a VFA series with a true B1 of 1; the B1 map's values decide.
	fa := []float64{2, 5, 10, 15, 20, 30}
	vfa := decaySeries(3, 3, 1, fa, 0, 1)
	vfa.Acq = faAcq(fa, 15)
	vn := vfa.Voxels()
	for v := 0; v < vn; v++ {
		y := spgr(fa, 15, 1, 1000, 1)
		for k := range fa {
			vfa.Data[k*vn+v] = float32(y[k])
		}
	}
	b1 := []float32{1, 0, -1, float32(math.NaN()), float32(math.Inf(1)), MaxB1 + 0.01, MinB1, MaxB1, 100}
	want := []Status{OK, BadB1, BadB1, BadB1, BadB1, BadB1, OK, OK, BadB1}
	res, err := Run(context.Background(), vfa, &VariableFlipAngle{}, &Options{B1: b1, NoThreshold: true})
	if err != nil {
		t.Fatal(err)
	}
	for v, w := range want {
		s := Status(res.Status[v])
		// At the bounds the fit may legitimately fail for other reasons
		// (the signal was made with B1 = 1): only "not BadB1" is asserted.
		if w == OK && s == BadB1 || w == BadB1 && s != BadB1 {
			t.Errorf("B1 %v: status %v, want %v", b1[v], s, w)
		}
	}
	if s := Status(res.Status[0]); s != OK || math.Abs(float64(res.Values[0][0])-1000) > 1e-3 {
		t.Errorf("B1 1: status %v T1 %v, want ok 1000", s, res.Values[0][0])
	}
}
