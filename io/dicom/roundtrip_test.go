package dicom

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// seeded is a deterministic random source for the writer's UIDs and file
// names.
type seeded struct{ r *rand.ChaCha8 }

func (s seeded) Read(p []byte) (int, error) { return s.r.Read(p) }

func newSeeded(n byte) seeded { return seeded{rand.NewChaCha8([32]byte{n})} }

// obliqueImage returns a 4-D test image on an oblique, non-square grid
// with a multi-echo decay (values up to 1000).
func obliqueImage(nx, ny, nz, nt int) *volume.Image {
	im := volume.New(nx, ny, nz, nt)
	// Rotation about an oblique axis (Rodrigues), voxel sizes 0.8, 1.1,
	// 2.5 mm; an exact right-handed rigid grid.
	ax := [3]float64{0.3, -0.5, 0.81}
	nrm := math.Sqrt(dot(ax, ax))
	for i := range ax {
		ax[i] /= nrm
	}
	th := 0.6
	c, s := math.Cos(th), math.Sin(th)
	var r [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			r[i][j] = (1 - c) * ax[i] * ax[j]
			if i == j {
				r[i][j] += c
			}
		}
	}
	r[0][1] -= s * ax[2]
	r[0][2] += s * ax[1]
	r[1][0] += s * ax[2]
	r[1][2] -= s * ax[0]
	r[2][0] -= s * ax[1]
	r[2][1] += s * ax[0]
	vox := [3]float64{0.8, 1.1, 2.5}
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			im.Affine[i][j] = r[i][j] * vox[j]
		}
	}
	im.Affine[0][3], im.Affine[1][3], im.Affine[2][3] = 12.5, -40.25, 7.75
	im.Acq = make([]volume.Acquisition, nt)
	for t := range im.Acq {
		im.Acq[t] = volume.Acquisition{EchoTime: 10 * float64(t+1), InversionTime: math.NaN(), RepetitionTime: 3000, FlipAngle: 90}
		for k := 0; k < nz; k++ {
			for j := 0; j < ny; j++ {
				for i := 0; i < nx; i++ {
					t2 := 40 + float64(i) + 3*float64(k)
					im.Data[im.Index(i, j, k, t)] = float32((900 + 5*float64(j)) * math.Exp(-im.Acq[t].EchoTime/t2))
				}
			}
		}
	}
	im.Source = volume.Source{Description: "round trip", Scanner: "RT-1", FieldStrength: 1.5, AcquiredAt: "2024-03-05T14:30:12+01:00"}
	return im
}

// TestRoundTrip writes classic and enhanced series, scans and loads them
// back: the affine within 1e-4 mm, every sample within the quantisation
// step (max|v|/65535 per image, half of it plus float32 rounding), the
// acquisition parameters and the identity.
func TestRoundTrip(t *testing.T) {
	for _, enhanced := range []bool{false, true} {
		name := map[bool]string{false: "classic", true: "enhanced"}[enhanced]
		t.Run(name, func(t *testing.T) {
			im := obliqueImage(7, 5, 4, 3)
			dir := filepath.Join(t.TempDir(), "series")
			if err := WriteSeries(dir, im, &WriteOptions{Enhanced: enhanced, SeriesNumber: 12, Rand: newSeeded(1)}); err != nil {
				t.Fatal(err)
			}
			files, _ := os.ReadDir(dir)
			if want := map[bool]int{false: 12, true: 1}[enhanced]; len(files) != want {
				t.Fatalf("%d files, want %d", len(files), want)
			}
			c, err := Scan([]string{dir}, nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(c.Series) != 1 || len(c.Problems) != 0 {
				t.Fatalf("series %d, problems %v", len(c.Series), c.Problems)
			}
			s := c.Series[0]
			if s.Varying != "EchoTime" || s.Echo != "SE" || s.Enhanced != enhanced || s.Number != 12 {
				t.Errorf("varying %q echo %q enhanced %v number %d", s.Varying, s.Echo, s.Enhanced, s.Number)
			}
			back, err := LoadSeries(s)
			if err != nil {
				t.Fatal(err)
			}
			if back.Dims != im.Dims {
				t.Fatalf("dims %v, want %v", back.Dims, im.Dims)
			}
			checkAffine(t, "round trip", back.Affine, im.Affine, 1e-4)
			for vol := 0; vol < im.Dims[2]*im.Dims[3]; vol++ {
				plane := im.Dims[0] * im.Dims[1]
				var m float64
				for _, x := range im.Data[vol*plane : (vol+1)*plane] {
					m = math.Max(m, math.Abs(float64(x)))
				}
				tol := m/65535/2*1.0001 + 1e-4
				for i := vol * plane; i < (vol+1)*plane; i++ {
					if d := math.Abs(float64(back.Data[i] - im.Data[i])); d > tol {
						t.Fatalf("sample %d: %g, want %g (tolerance %g)", i, back.Data[i], im.Data[i], tol)
					}
				}
			}
			for i, a := range back.Acq {
				w := im.Acq[i]
				if a.EchoTime != w.EchoTime || a.RepetitionTime != w.RepetitionTime || a.FlipAngle != w.FlipAngle || !math.IsNaN(a.InversionTime) {
					t.Errorf("acq[%d] = %+v, want %+v", i, a, w)
				}
			}
			src := back.Source
			if src.Description != "round trip" || src.Scanner != "RT-1" || src.FieldStrength != 1.5 || src.AcquiredAt != "2024-03-05T14:30:12.000000+01:00" {
				t.Errorf("source %+v", src)
			}
		})
	}
}

// TestRoundTripReversedSlices writes an image whose slice axis points
// against X × Y: the reader returns the slices reversed, with an affine
// that puts every voxel at the same world position.
func TestRoundTripReversedSlices(t *testing.T) {
	im := obliqueImage(3, 4, 5, 1)
	for r := 0; r < 3; r++ {
		im.Affine[r][2] = -im.Affine[r][2]
	}
	dir := t.TempDir()
	if err := WriteSeries(dir, im, &WriteOptions{Rand: newSeeded(2)}); err != nil {
		t.Fatal(err)
	}
	c, err := Scan([]string{dir}, nil)
	if err != nil || len(c.Series) != 1 {
		t.Fatal(err, c)
	}
	back, err := LoadSeries(c.Series[0])
	if err != nil {
		t.Fatal(err)
	}
	nz := im.Dims[2]
	for k := 0; k < nz; k++ {
		x0, y0, z0 := im.Affine.Apply(1, 2, float64(k))
		x1, y1, z1 := back.Affine.Apply(1, 2, float64(nz-1-k))
		if math.Abs(x0-x1)+math.Abs(y0-y1)+math.Abs(z0-z1) > 1e-4 {
			t.Errorf("slice %d at (%g %g %g), back at (%g %g %g)", k, x0, y0, z0, x1, y1, z1)
		}
		a, b := im.Data[im.Index(1, 2, k, 0)], back.Data[back.Index(1, 2, nz-1-k, 0)]
		if math.Abs(float64(a-b)) > 0.01 {
			t.Errorf("slice %d: %g back as %g", k, a, b)
		}
	}
}
