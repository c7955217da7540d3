package roi

import (
	"encoding/json"
	"math"
	"os"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// TestSummarise: values checked by hand against numpy.percentile's default
// (linear, Hyndman & Fan type 7) and numpy.std(ddof=1) (common practice).
func TestSummarise(t *testing.T) {
	vals := []float32{4, 1, float32(math.NaN()), 3, 2, 10}
	status := []uint8{0, 0, 0, 0, 0, 3}
	s, _ := Summarise(vals, status, []int{0, 1, 2, 3, 4, 5}, nil)
	// Finite and ok: 1, 2, 3, 4 → mean 2.5, SD √(5/3), median 2.5,
	// Q1 1.75, Q3 3.25.
	if s.N != 4 || s.Voxels != 6 || s.Mean != 2.5 || math.Abs(s.SD-math.Sqrt(5.0/3)) > 1e-12 ||
		s.Median != 2.5 || s.Q1 != 1.75 || s.Q3 != 3.25 || s.Min != 1 || s.Max != 4 || math.Abs(s.Failed-2.0/6) > 1e-12 {
		t.Errorf("%+v", s)
	}
	e, _ := Summarise(vals, nil, nil, nil)
	if e.N != 0 || !math.IsNaN(e.Mean) {
		t.Errorf("empty region: %+v", e)
	}
}

func TestSphere(t *testing.T) {
	im := volume.New(20, 20, 20, 1)
	im.Affine[0][0], im.Affine[1][1], im.Affine[2][2] = 2, 2, 2
	// A sphere of radius 3 mm on a 2 mm grid centred on a voxel centre
	// holds the centre, 6 face neighbours (2 mm) and 12 edge neighbours
	// (2.83 mm): 19 voxels.
	if n := len(Sphere(im, [3]float64{20, 20, 20}, 3)); n != 19 {
		t.Errorf("sphere holds %d voxels, want 19", n)
	}
	// Clipped at the image corner: one octant of the same shape (8 of 19:
	// centre, 3 faces, 3 edges... plus none beyond) = 1+3+3 = 7.
	if n := len(Sphere(im, [3]float64{0, 0, 0}, 3)); n != 7 {
		t.Errorf("corner sphere holds %d voxels, want 7", n)
	}
}

// TestSummariseAgreesWithNumpy: statistics of the same values as numpy
// 1.24 (testdata/gen/roi_stats_refs.py): mean, std(ddof=1), median,
// percentile(25, 75) with linear interpolation, min, max.
func TestSummariseAgreesWithNumpy(t *testing.T) {
	raw, err := os.ReadFile("../testdata/reference/roi_stats.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Cases []struct {
			Values                         []*float64
			N                              int
			Mean, Median, Q1, Q3, Min, Max float64
			SD, CoV                        *float64
		}
	}
	if err := json.Unmarshal(raw, &ref); err != nil || len(ref.Cases) == 0 {
		t.Fatalf("reference: %v", err)
	}
	for ci, c := range ref.Cases {
		vals := make([]float32, len(c.Values))
		idx := make([]int, len(c.Values))
		for i, v := range c.Values {
			idx[i] = i
			if v == nil {
				vals[i] = float32(math.NaN())
			} else {
				vals[i] = float32(*v)
			}
		}
		s, _ := Summarise(vals, nil, idx, nil)
		// Values pass through float32 (maps are float32): tolerance 1e-6
		// relative.
		eq := func(name string, got, want float64) {
			if math.Abs(got-want) > 1e-6*math.Abs(want)+1e-9 {
				t.Errorf("case %d %s = %.9g, numpy %.9g", ci, name, got, want)
			}
		}
		if s.N != c.N {
			t.Errorf("case %d n = %d, numpy %d", ci, s.N, c.N)
		}
		eq("mean", s.Mean, c.Mean)
		eq("median", s.Median, c.Median)
		eq("q1", s.Q1, c.Q1)
		eq("q3", s.Q3, c.Q3)
		eq("min", s.Min, c.Min)
		eq("max", s.Max, c.Max)
		if c.SD != nil {
			if math.Abs(s.SD-*c.SD) > 1e-4**c.SD {
				t.Errorf("case %d sd = %g, numpy %g", ci, s.SD, *c.SD)
			}
			if math.Abs(s.CoV-*c.CoV) > 1e-4**c.CoV {
				t.Errorf("case %d cov = %g, numpy %g", ci, s.CoV, *c.CoV)
			}
		} else if !math.IsNaN(s.SD) {
			t.Errorf("case %d: SD of one value %g, want NaN", ci, s.SD)
		}
	}
}
