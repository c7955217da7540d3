package roi

import (
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// FuzzParseList feeds arbitrary bytes to the region-list parser (CSV and
// JSON), seeded with the lists of TestParseList and its broken-input
// table (style.md). It must not panic; errors are one line starting with
// the name; an accepted list has named, finite regions of positive radius
// in a known space, and turning it into spheres of a small grid must not
// panic or hang (huge radii and centres are clipped to the image).
func FuzzParseList(f *testing.F) {
	for _, s := range []string{
		"name,x,y,z,radius,space\nA1, 1, 2, 3, 4, mm\n# comment\nB,0,0,0,2,voxel\n",
		`[{"name":"A1","x":1,"y":2,"z":3,"radius":4,"space":"mm"},{"name":"B","x":0,"y":0,"z":0,"radius":2,"space":"voxel"}]`,
		"\ufeffName,X,Y,Z,Radius,Space\r\nA,1,2,3,4,MM\r\n",
		"name,x,y,z,radius,space\nA,1,2,three,4,mm\n",
		"name,x,y,z,radius,space\nA,1,2,3,4,inch\n",
		"name,x,y,z,radius,space\nA,1,2,3,-4,mm\n",
		"name,x,y,z,radius,space\nA,1,2,3,4,mm\nA,1,2,3,4,mm\n",
		"name,x,y,z,radius,space\nA,1,2,3\n",
		"name,x,y,z,radius,space\n\"A,1,2,3,4,mm\n",
		"name,x,y,z,radius,space\nA,1e308,2,3,1e308,voxel\n",
		`[{"name":"A","x":1,"y":2,"z":3,"radius":4,"space":"mm","colour":1}]`,
		`[{"name":"<script>","x":0,"y":0,"z":0,"radius":1e9,"space":"voxel"}]`,
	} {
		f.Add([]byte(s))
	}
	im := volume.New(6, 5, 3, 1)
	im.Affine = volume.Affine{{2, 0, 0, -5}, {0, 2, 0, -4}, {0, 0, 3, -3}, {0, 0, 0, 1}}
	f.Fuzz(func(t *testing.T, data []byte) {
		specs, err := ParseList(data, "fuzz.csv")
		if err != nil {
			if m := err.Error(); !strings.HasPrefix(m, "fuzz.csv: ") || strings.ContainsAny(m, "\r\n") {
				t.Fatalf("bad error text %q", m)
			}
			return
		}
		for _, s := range specs {
			if err := s.check(); err != nil {
				t.Fatalf("accepted region %+v: %v", s, err)
			}
		}
		if len(specs) > 50 {
			specs = specs[:50]
		}
		regs, err := Spheres(im, specs, 0)
		if err != nil {
			if strings.ContainsAny(err.Error(), "\r\n") {
				t.Fatalf("bad error text %q", err)
			}
			return
		}
		for _, r := range regs {
			for _, i := range r.Index {
				if i < 0 || i >= im.Voxels() {
					t.Fatalf("region %q holds voxel %d outside the image", r.Name, i)
				}
			}
		}
	})
}
