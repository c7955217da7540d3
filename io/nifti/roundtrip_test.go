package nifti

import (
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// obliqueFlip is an oblique affine with unequal voxel sizes and a negative
// determinant (k axis reversed), so the qform needs qfac = -1.
func obliqueFlip() volume.Affine {
	th, ph := 0.4, -0.25
	c, s := math.Cos(th), math.Sin(th)
	cp, sp := math.Cos(ph), math.Sin(ph)
	// R = Rz(th)·Rx(ph), columns scaled by 0.8, 0.5, -2.
	r := [3][3]float64{
		{c, -s * cp, s * sp},
		{s, c * cp, -c * sp},
		{0, sp, cp},
	}
	z := [3]float64{0.8, 0.5, -2}
	var a volume.Affine
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			a[i][j] = r[i][j] * z[j]
		}
	}
	a[0][3], a[1][3], a[2][3], a[3][3] = 100, -120.5, 30.25, 1
	return a
}

func testImage(nt int) *volume.Image {
	im := volume.New(5, 4, 3, nt)
	for i := range im.Data {
		im.Data[i] = float32(i % 100)
	}
	im.Affine = obliqueFlip()
	return im
}

func affineClose(a, b volume.Affine, tol float64) bool {
	for r := 0; r < 4; r++ {
		for c := 0; c < 4; c++ {
			if math.Abs(a[r][c]-b[r][c]) > tol*(1+math.Abs(b[r][c])) {
				return false
			}
		}
	}
	return true
}

func TestRoundTrip(t *testing.T) {
	types := []Datatype{Uint8, Int8, Int16, Uint16, Int32, Uint32, Int64, Uint64, Float32, Float64}
	dir := t.TempDir()
	for _, dt := range types {
		for _, version := range []int{1, 2} {
			for _, ext := range []string{".nii", ".nii.gz"} {
				name := filepath.Join(dir, "rt_"+dt.String()+"_v"+string(rune('0'+version))+ext)
				im := testImage(2)
				opt := &WriteOptions{Datatype: dt, Version: version, Description: "round trip", TimeStep: 25}
				if err := Write(name, im, opt); err != nil {
					t.Fatal(err)
				}
				got, err := Read(name)
				if err != nil {
					t.Fatal(err)
				}
				h, err := ReadHeader(name)
				if err != nil {
					t.Fatal(err)
				}
				if got.Dims != im.Dims {
					t.Errorf("%s: dims %v, want %v", name, got.Dims, im.Dims)
				}
				for i := range im.Data {
					if got.Data[i] != im.Data[i] {
						t.Fatalf("%s: sample %d = %g, want %g", name, i, got.Data[i], im.Data[i])
					}
				}
				// float32 storage (NIfTI-1) gives ~6e-8 relative error; the
				// qform goes through the quaternion in float32.
				tol := 1e-6
				if version == 2 {
					tol = 1e-12
				}
				if !affineClose(got.Affine, im.Affine, tol) {
					t.Errorf("%s: affine\n%v\nwant\n%v", name, got.Affine, im.Affine)
				}
				if q := h.Qform(); !affineClose(q, im.Affine, tol) {
					t.Errorf("%s: qform\n%v\nwant\n%v", name, q, im.Affine)
				}
				if h.QformCode != 1 || h.SformCode != 1 || h.Qfac() != -1 {
					t.Errorf("%s: codes %d %d qfac %g", name, h.QformCode, h.SformCode, h.Qfac())
				}
				if h.Datatype != dt || h.Version != version || h.Descrip != "round trip" || h.XYZTUnits != UnitMM|UnitMsec || h.Pixdim[4] != 25 {
					t.Errorf("%s: header %+v", name, h)
				}
				want := int64(352)
				if version == 2 {
					want = 544
				}
				if h.VoxOffset != want {
					t.Errorf("%s: vox_offset %d, want %d", name, h.VoxOffset, want)
				}
			}
		}
	}
}

// TestQuaternion checks affine → quaternion → affine for rotations that
// take each branch of the conversion, including the 180° turns where the
// quaternion's a is 0 (nifti1.h method 2; exact identities, common
// practice).
func TestQuaternion(t *testing.T) {
	rots := []volume.Affine{
		volume.Identity(),
		{{-1, 0, 0, 0}, {0, -1, 0, 0}, {0, 0, 1, 0}, {0, 0, 0, 1}},
		{{1, 0, 0, 0}, {0, -1, 0, 0}, {0, 0, -1, 0}, {0, 0, 0, 1}},
		{{-1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, -1, 0}, {0, 0, 0, 1}},
		{{0, 1, 0, 0}, {1, 0, 0, 0}, {0, 0, -1, 0}, {0, 0, 0, 1}},
		{{0, 0, 1, 0}, {0, -1, 0, 0}, {1, 0, 0, 0}, {0, 0, 0, 1}},
		obliqueFlip(),
	}
	for i, r := range rots {
		for _, flip := range []bool{false, true} {
			a := r
			a[0][3], a[1][3], a[2][3] = 1, 2, 3
			if flip {
				for k := 0; k < 3; k++ {
					a[k][2] = -a[k][2]
				}
			}
			q, off, sp, qfac := affineToQuatern(&a)
			b := quaternToAffine(q, off, sp, qfac)
			if !affineClose(b, a, 1e-12) {
				t.Errorf("case %d flip %v: got\n%v\nwant\n%v", i, flip, b, a)
			}
		}
	}
}

// TestNonOrthogonal: the sform keeps a sheared affine exactly, the qform is
// rigid with the column norms as voxel sizes.
func TestNonOrthogonal(t *testing.T) {
	im := volume.New(2, 2, 2, 1)
	im.Affine = volume.Affine{{1.2, 0.3, 0, -40}, {0, 0.9, 0.2, 12.5}, {0.1, 0, 2.5, 7}, {0, 0, 0, 1}}
	name := filepath.Join(t.TempDir(), "shear.nii")
	if err := Write(name, im, &WriteOptions{Version: 2}); err != nil {
		t.Fatal(err)
	}
	h, err := ReadHeader(name)
	if err != nil {
		t.Fatal(err)
	}
	if s := h.Sform(); !affineClose(s, im.Affine, 1e-15) {
		t.Errorf("sform %v", s)
	}
	q := h.Qform()
	want := im.Affine.VoxelSize()
	got := q.VoxelSize()
	for c := 0; c < 3; c++ {
		if math.Abs(got[c]-want[c]) > 1e-12 {
			t.Errorf("qform voxel size %v, want %v", got, want)
		}
		for d := c + 1; d < 3; d++ {
			dot := q[0][c]*q[0][d] + q[1][c]*q[1][d] + q[2][c]*q[2][d]
			if math.Abs(dot) > 1e-12 {
				t.Errorf("qform columns %d,%d not orthogonal: %g", c, d, dot)
			}
		}
	}
}

func TestWriteErrors(t *testing.T) {
	dir := t.TempDir()
	im := testImage(1)
	half := testImage(1)
	half.Data[7] = 0.5
	nan := testImage(1)
	nan.Data[3] = float32(math.NaN())
	cases := []struct {
		name string
		im   *volume.Image
		opt  *WriteOptions
		want string
	}{
		{"a.img", im, nil, "a.img: nifti: file name must end .nii or .nii.gz"},
		{"b.nii", half, &WriteOptions{Datatype: Uint8}, "b.nii: nifti: cannot write: sample 7 (0.5) is not representable as uint8"},
		{"c.nii.gz", nan, &WriteOptions{Datatype: Int16}, "c.nii.gz: nifti: cannot write: sample 3 (NaN) is not representable as int16"},
		{"d.nii", im, &WriteOptions{Datatype: Complex64}, "d.nii: nifti: cannot write datatype complex64"},
		{"e.nii", im, &WriteOptions{Version: 3}, "e.nii: nifti: version 3, want 1 or 2"},
		{"f.nii", &volume.Image{Dims: [4]int{2, 2, 2, 1}}, nil, "f.nii: nifti: cannot write: volume: dimensions do not match the data: 0 samples for a 2x2x2x1 grid"},
	}
	for _, c := range cases {
		path := filepath.Join(dir, c.name)
		err := Write(path, c.im, c.opt)
		if err == nil {
			t.Errorf("%s: no error", c.name)
			continue
		}
		if got := err.Error(); got != filepath.Join(dir, c.want) {
			t.Errorf("%s:\n got %q\nwant %q", c.name, got, filepath.Join(dir, c.want))
		}
	}
	// Nothing may be left behind: no target, no temporary file.
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		t.Errorf("left behind: %s", e.Name())
	}
}

// TestWriteReplacesAtomically: an existing file is replaced only when the
// new one is complete; a failed write leaves the old one.
func TestWriteReplacesAtomically(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "m.nii.gz")
	if err := Write(path, testImage(1), nil); err != nil {
		t.Fatal(err)
	}
	before, _ := os.ReadFile(path)
	bad := testImage(1)
	bad.Data[0] = -1
	if err := Write(path, bad, &WriteOptions{Datatype: Uint8}); err == nil {
		t.Fatal("no error")
	}
	after, _ := os.ReadFile(path)
	if string(before) != string(after) {
		t.Error("failed write changed the existing file")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Errorf("folder holds %d entries", len(ents))
	}
}
