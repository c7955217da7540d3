package roi_test

import (
	"fmt"

	"github.com/tauvox/tauvox/roi"
	"github.com/tauvox/tauvox/volume"
)

// Statistics of a map inside a sphere given in voxel coordinates.
func ExampleSummarise() {
	im := &volume.Image{Dims: [4]int{9, 9, 1, 1}, Data: make([]float32, 81), Affine: volume.Affine{{1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}}}
	for i := range im.Data {
		im.Data[i] = float32(100 + i%9) // 100…108 along x
	}
	specs, err := roi.ParseList([]byte("name,x,y,z,radius,space\ncentre,4,4,0,1.5,voxel\n"), "regions.csv")
	if err != nil {
		panic(err)
	}
	regions, err := roi.Spheres(im, specs, 0)
	if err != nil {
		panic(err)
	}
	s, _ := roi.Summarise(im.Data, nil, regions[0].Index, nil)
	fmt.Printf("%s: n %d, mean %.1f, median %.1f, min %.0f, max %.0f\n", regions[0].Name, s.N, s.Mean, s.Median, s.Min, s.Max)
	// Output:
	// centre: n 9, mean 104.0, median 104.0, min 103, max 105
}
