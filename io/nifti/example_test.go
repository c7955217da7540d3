package nifti_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/volume"
)

func Example() {
	dir, err := os.MkdirTemp("", "nifti-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)

	// A 4×4×2 map with 0.5 mm in-plane voxels and 3 mm slices.
	im := volume.New(4, 4, 2, 1)
	im.Affine = volume.Affine{{-0.5, 0, 0, 40}, {0, -0.5, 0, 60}, {0, 0, 3, -10}, {0, 0, 0, 1}}
	for i := range im.Data {
		im.Data[i] = float32(i)
	}
	path := filepath.Join(dir, "T2map.nii.gz")
	if err := nifti.Write(path, im, &nifti.WriteOptions{Description: "T2 map, ms"}); err != nil {
		log.Fatal(err)
	}

	back, err := nifti.Read(path)
	if err != nil {
		log.Fatal(err)
	}
	h, err := nifti.ReadHeader(path)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(back.Dims, back.Data[5], back.Affine.VoxelSize())
	fmt.Println(h.Datatype, h.QformCode, h.SformCode, h.Qfac(), h.Descrip)
	// Output:
	// [4 4 2 1] 5 [0.5 0.5 3]
	// float32 1 1 1 T2 map, ms
}
