package main

import (
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/internal/refdata"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/volume"
)

// TestFitSDMapsAgainstScipy runs `tauvox fit` on a NIfTI series whose
// voxels are the committed noisy signals of testdata/reference/
// scipy_t2.json (no offset, no noise floor) and checks the written maps
// T2map, T2map_sd, R2map_sd and M0map_sd against scipy.optimize.curve_fit's
// estimates and √diag(pcov) (script testdata/gen/scipy_t2_refs.py):
// 3e-6 relative, about 4 times the observed worst difference (7e-7:
// float32 maps, curve_fit's numerical Jacobian). SE(R2) is
// 1000·SE(T2)/T2² (delta method). The whole command path is covered:
// reading, the engine, the map writer.
func TestFitSDMapsAgainstScipy(t *testing.T) {
	ref, err := refdata.ReadScipyT2("../../testdata/reference/scipy_t2.json")
	if err != nil {
		t.Fatal(err)
	}
	cases := ref.Plain()
	n := len(cases)
	im := volume.New(n, 1, 1, len(ref.TE))
	for v, c := range cases {
		for k, y := range c.Signal {
			im.Data[k*n+v] = float32(y)
		}
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "mese.nii.gz")
	if err := nifti.Write(in, im, nil); err != nil {
		t.Fatal(err)
	}
	te := make([]string, len(ref.TE))
	for i, x := range ref.TE {
		te[i] = fmt.Sprint(x)
	}
	out := filepath.Join(dir, "maps")
	if code, _, stderr := tauvox(t, "fit", in, "--model", "t2", "--te", strings.Join(te, ","), "--no-mask", "--out", out); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	read := func(stem string) []float32 {
		img, err := nifti.Read(filepath.Join(out, stem+".nii.gz"))
		if err != nil {
			t.Fatal(err)
		}
		return img.Data
	}
	t2, sdT2, sdR2, m0, sdM0 := read("T2map"), read("T2map_sd"), read("R2map_sd"), read("M0map"), read("M0map_sd")
	var worst float64
	for v, c := range cases {
		for _, x := range []struct {
			name      string
			got, want float64
		}{
			{"T2map", float64(t2[v]), c.T2},
			{"T2map_sd", float64(sdT2[v]), c.SeT2},
			{"R2map_sd", float64(sdR2[v]), 1000 * c.SeT2 / (c.T2 * c.T2)},
			{"M0map", float64(m0[v]), c.M0},
			{"M0map_sd", float64(sdM0[v]), c.SeM0},
		} {
			d := math.Abs(x.got-x.want) / x.want
			worst = math.Max(worst, d)
			if !(d <= 3e-6) {
				t.Errorf("voxel %d %s: %.7g, scipy %.7g", v, x.name, x.got, x.want)
			}
		}
	}
	t.Logf("%d voxels: worst relative difference from scipy curve_fit %.1e", n, worst)
}
