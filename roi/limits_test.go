package roi

import (
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// TestRegionVoxelLimit: many large spheres are refused once their voxels
// together pass MaxRegionVoxels, before the index lists are made in full;
// a list just under the limit is accepted (the boundary counts).
func TestRegionVoxelLimit(t *testing.T) {
	im := volume.New(16, 16, 16, 1) // 1 mm voxels at the origin
	whole := Spec{X: 8, Y: 8, Z: 8, Radius: 200, Space: SpaceMM}
	n := 16 * 16 * 16
	const limit = 100 * 16 * 16 * 16
	under := limit / n // spheres covering the whole image
	specs := make([]Spec, under+1)
	for i := range specs {
		specs[i] = whole
		specs[i].Name = "r" + string(rune('A'+i%26)) + strings.Repeat("x", i/26)
	}
	regs, err := spheres(im, specs[:under], 0, limit)
	if err != nil || len(regs) != under {
		t.Fatalf("%d whole-image spheres (%d voxels, limit %d): %v", under, under*n, limit, err)
	}
	_, err = spheres(im, specs, 0, limit)
	if err == nil || !strings.Contains(err.Error(), `the regions up to "rWxxx" hold more than 409600 voxels in all`) {
		t.Errorf("%d spheres: err %v", len(specs), err)
	}
}

// TestLabelValues: a label image's whole-number values are kept up to
// 2^24 (the largest float32 still distinguishes from its neighbours,
// IEEE 754 binary32); a larger value or a fraction is refused by value,
// never dropped silently.
func TestLabelValues(t *testing.T) {
	im := volume.New(4, 1, 1, 1)
	for _, tc := range []struct {
		v    float32
		want string
	}{
		{1 << 24, ""},
		{1<<24 + 2, "label value 1.6777218e+07 at voxel (1, 0, 0) is above 16777216"},
		{2.5, "label value 2.5 at voxel (1, 0, 0) is not a whole number"},
	} {
		lab := volume.New(4, 1, 1, 1)
		lab.Data[0] = 3
		lab.Data[1] = tc.v
		regs, err := Labels(im, lab, 0)
		switch {
		case tc.want == "" && (err != nil || len(regs) != 2 || regs[1].Name != "16777216"):
			t.Errorf("label %g: %v %+v", tc.v, err, regs)
		case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)):
			t.Errorf("label %g: err %v, want %q", tc.v, err, tc.want)
		}
	}
}
