package pipeline

import (
	"context"
	"math"
	"path/filepath"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/refdata"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/volume"
)

// scipyT2 holds the mono-exponential cases of
// testdata/reference/scipy_t2.json (scipy.optimize.curve_fit, script
// testdata/gen/scipy_t2_refs.py) without offset or noise floor.
func scipyT2(t *testing.T) (te []float64, signals [][]float64, t2, seT2, seM0 []float64) {
	t.Helper()
	ref, err := refdata.ReadScipyT2("../../testdata/reference/scipy_t2.json")
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range ref.Plain() {
		signals = append(signals, c.Signal)
		t2, seT2, seM0 = append(t2, c.T2), append(seT2, c.SeT2), append(seM0, c.SeM0)
	}
	return ref.TE, signals, t2, seT2, seM0
}

// TestSDMapsWritten: the standard-error maps a fit writes (T2map_sd,
// R2map_sd, M0map_sd) hold the engine's standard errors, voxel for voxel,
// exactly (both float32), and those equal scipy.optimize.curve_fit's
// √diag(pcov) for the same committed signals (testdata/reference/
// scipy_t2.json) to 3e-6 relative (about 4 times the observed worst
// difference, 7e-7, which is logged: float32 maps, curve_fit's numerical
// Jacobian); SE(R2) = 1000·SE(T2)/T2² (delta method). A scaled or swapped
// standard-error map fails.
func TestSDMapsWritten(t *testing.T) {
	te, signals, t2, seT2, seM0 := scipyT2(t)
	n := len(signals)
	if n < 15 {
		t.Fatalf("%d reference cases", n)
	}
	im := volume.New(n, 1, 1, len(te))
	im.Acq = make([]volume.Acquisition, len(te))
	for i := range im.Acq {
		im.Acq[i] = volume.Unknown()
		im.Acq[i].EchoTime = te[i]
	}
	for v, s := range signals {
		for k, y := range s {
			im.Data[k*n+v] = float32(y)
		}
	}
	m := &fit.MonoExp{}
	maps, err := fit.Run(context.Background(), im, m, &fit.Options{NoThreshold: true, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "maps")
	st, err := mapset.NewStage(out, false)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := mapset.Write(st, outputs(m), toSlab(maps), im, &mapset.Info{Model: m.Name(), Method: m.Method(), Version: "test", StatusNames: statusNames()}); err != nil {
		t.Fatal(err)
	}
	if err := st.Commit(); err != nil {
		t.Fatal(err)
	}
	read := func(stem string) []float32 {
		img, err := nifti.Read(filepath.Join(out, stem+".nii.gz"))
		if err != nil {
			t.Fatal(err)
		}
		return img.Data
	}
	var worst float64
	for k, p := range m.Outputs() {
		sd := read(p.Map + "_sd")
		for v := 0; v < n; v++ {
			if sd[v] != maps.SE[k][v] || !(sd[v] > 0) {
				t.Errorf("%s_sd voxel %d: written %g, engine %g", p.Map, v, sd[v], maps.SE[k][v])
			}
		}
	}
	sdT2, sdR2, sdM0, t2m := read("T2map_sd"), read("R2map_sd"), read("M0map_sd"), read("T2map")
	for v := 0; v < n; v++ {
		wantR2 := 1000 * seT2[v] / (t2[v] * t2[v])
		for _, c := range []struct {
			name      string
			got, want float64
		}{
			{"T2map_sd", float64(sdT2[v]), seT2[v]},
			{"R2map_sd", float64(sdR2[v]), wantR2},
			{"M0map_sd", float64(sdM0[v]), seM0[v]},
			{"T2map", float64(t2m[v]), t2[v]},
		} {
			d := math.Abs(c.got-c.want) / c.want
			worst = math.Max(worst, d)
			if d > 3e-6 {
				t.Errorf("%s voxel %d: %.6g, scipy curve_fit %.6g", c.name, v, c.got, c.want)
			}
		}
	}
	t.Logf("%d voxels: written maps and standard errors against scipy curve_fit, worst relative difference %.1e", n, worst)
}
