package roi

import (
	"math"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// oblique returns a 20×18×6 grid rotated 30° about z and 10° about x,
// voxels 1.5×1.2×4 mm.
func oblique() *volume.Image {
	im := volume.New(20, 18, 6, 1)
	cz, sz := math.Cos(math.Pi/6), math.Sin(math.Pi/6)
	cx, sx := math.Cos(math.Pi/18), math.Sin(math.Pi/18)
	rz := [3][3]float64{{cz, -sz, 0}, {sz, cz, 0}, {0, 0, 1}}
	rx := [3][3]float64{{1, 0, 0}, {0, cx, -sx}, {0, sx, cx}}
	vs := [3]float64{1.5, 1.2, 4}
	for r := 0; r < 3; r++ {
		for c := 0; c < 3; c++ {
			var m float64
			for k := 0; k < 3; k++ {
				m += rz[r][k] * rx[k][c]
			}
			im.Affine[r][c] = m * vs[c]
		}
	}
	im.Affine[0][3], im.Affine[1][3], im.Affine[2][3] = -12, 30, -7
	return im
}

// TestSpheresOblique: a sphere given in scanner mm at a voxel's centre, with
// a radius below half the smallest voxel size, selects exactly that voxel
// on an oblique grid; in voxel space the same (the affine maps the voxel
// centre, nifti1.h).
func TestSpheresOblique(t *testing.T) {
	im := oblique()
	for _, ijk := range [][3]int{{0, 0, 0}, {7, 11, 2}, {19, 17, 5}, {3, 16, 4}} {
		x, y, z := im.Affine.Apply(float64(ijk[0]), float64(ijk[1]), float64(ijk[2]))
		want := im.Index(ijk[0], ijk[1], ijk[2], 0)
		regs, err := Spheres(im, []Spec{
			{Name: "mm", X: x, Y: y, Z: z, Radius: 0.5, Space: SpaceMM},
			{Name: "vox", X: float64(ijk[0]), Y: float64(ijk[1]), Z: float64(ijk[2]), Radius: 0.4, Space: SpaceVoxel},
		}, 0)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range regs {
			if len(r.Index) != 1 || r.Index[0] != want {
				t.Errorf("%v %s: %v, want [%d]", ijk, r.Name, r.Index, want)
			}
		}
	}
	// A larger sphere: every selected voxel centre lies within the radius
	// and every voxel within it is selected.
	regs, err := Spheres(im, []Spec{{Name: "big", X: -5, Y: 35, Z: -1, Radius: 6, Space: SpaceMM}}, 1)
	if err != nil {
		t.Fatal(err)
	}
	in := map[int]bool{}
	for _, v := range regs[0].Index {
		in[v] = true
	}
	for k := 0; k < 6; k++ {
		for j := 0; j < 18; j++ {
			for i := 0; i < 20; i++ {
				x, y, z := im.Affine.Apply(float64(i), float64(j), float64(k))
				d := math.Sqrt((x+5)*(x+5) + (y-35)*(y-35) + (z+1)*(z+1))
				if (d <= 5) != in[im.Index(i, j, k, 0)] {
					t.Fatalf("voxel %d,%d,%d at %.2f mm: selected %v", i, j, k, d, in[im.Index(i, j, k, 0)])
				}
			}
		}
	}
}

func TestParseList(t *testing.T) {
	csv := "name,x,y,z,radius,space\nA1, 1, 2, 3, 4, mm\n# comment\nB,0,0,0,2,voxel\n"
	js := `[{"name":"A1","x":1,"y":2,"z":3,"radius":4,"space":"mm"},{"name":"B","x":0,"y":0,"z":0,"radius":2,"space":"voxel"}]`
	for _, in := range []string{csv, js} {
		s, err := ParseList([]byte(in), "r")
		if err != nil || len(s) != 2 || s[0] != (Spec{"A1", 1, 2, 3, 4, "mm"}) || s[1].Space != "voxel" {
			t.Errorf("%q: %+v %v", in, s, err)
		}
	}
	bad := []struct{ in, want string }{
		{"", "empty file"},
		{"name,x,y,z,r,space\n", `header "name,x,y,z,r,space"`},
		{"name,x,y,z,radius,space\nA,1,2,three,4,mm\n", `line 2: z "three" is not a number`},
		{"name,x,y,z,radius,space\nA,1,2,3,4,inch\n", `space "inch"`},
		{"name,x,y,z,radius,space\nA,1,2,3,-4,mm\n", "radius must be positive"},
		{"name,x,y,z,radius,space\nA,1,2,3,4,mm\nA,1,2,3,4,mm\n", `"A" appears twice`},
		{"name,x,y,z,radius,space\nA,1,2,3\n", "wrong number of fields"},
		{"name,x,y,z,radius,space\n", "holds no region"},
		{`[{"name":"A","x":1,"radius":2,"space":"mm","colour":3}]`, `unknown field "colour"`},
		{"name,x,y,z,radius,space\nA,NaN,2,3,4,mm\n", "finite"},
	}
	for _, b := range bad {
		_, err := ParseList([]byte(b.in), "r.csv")
		if err == nil || !strings.Contains(err.Error(), b.want) || !strings.HasPrefix(err.Error(), "r.csv: ") {
			t.Errorf("%q: %v, want …%s", b.in, err, b.want)
		}
	}
}

func TestSpheresOutside(t *testing.T) {
	im := volume.New(10, 10, 2, 1)
	_, err := Spheres(im, []Spec{{Name: "far", X: 500, Y: 0, Z: 0, Radius: 3, Space: SpaceMM}}, 0)
	if err == nil || !strings.Contains(err.Error(), `"far"`) {
		t.Errorf("region outside the image: %v", err)
	}
	_, err = Spheres(im, []Spec{{Name: "thin", X: 5, Y: 5, Z: 0, Radius: 1, Space: SpaceMM}}, 2)
	if err == nil || !strings.Contains(err.Error(), "--erode") {
		t.Errorf("eroded away: %v", err)
	}
}

// TestLabels: nearest-neighbour resampling from a label grid at half the
// resolution and shifted, and erosion at a label boundary.
func TestLabels(t *testing.T) {
	im := volume.New(8, 8, 1, 1) // 1 mm voxels at the origin
	lab := volume.New(4, 4, 1, 1)
	lab.Affine[0][0], lab.Affine[1][1] = 2, 2
	lab.Affine[0][3], lab.Affine[1][3] = 0.5, 0.5 // label voxel (a, b) centred at 2a+0.5
	for b := 0; b < 4; b++ {
		for a := 0; a < 4; a++ {
			if a < 2 {
				lab.Data[a+4*b] = 1
			} else {
				lab.Data[a+4*b] = 2
			}
		}
	}
	regs, err := Labels(im, lab, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(regs) != 2 || regs[0].Name != "1" || regs[1].Name != "2" {
		t.Fatalf("%+v", regs)
	}
	// Map voxel i (centre i mm) takes label voxel round((i−0.5)/2):
	// i = 0…2 → a ≤ 1 (label 1), i = 3 → round(1.25) = 1, i = 4…7 → 2.
	if len(regs[0].Index) != 4*8 || len(regs[1].Index) != 4*8 {
		t.Errorf("sizes %d, %d", len(regs[0].Index), len(regs[1].Index))
	}
	er, err := Labels(im, lab, 1)
	if err != nil {
		t.Fatal(err)
	}
	// Erosion by 1 mm removes the column next to the boundary on each side.
	if len(er[0].Index) != 3*8 || len(er[1].Index) != 3*8 {
		t.Errorf("eroded sizes %d, %d", len(er[0].Index), len(er[1].Index))
	}
}
