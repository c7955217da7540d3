package pipeline_test

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/pipeline"
	"github.com/tauvox/tauvox/io/series"
	"github.com/tauvox/tauvox/volume"
)

// Fit a NIfTI series (with its BIDS sidecar) and write the maps, their
// previews and provenance.json into a folder.
func ExampleRun() {
	dir, err := os.MkdirTemp("", "pipeline-example")
	if err != nil {
		panic(err)
	}
	defer os.RemoveAll(dir)
	// A 4×4×2 multi-echo spin-echo series, T2 = 60 ms everywhere.
	acq := make([]volume.Acquisition, 8)
	im := &volume.Image{Dims: [4]int{4, 4, 2, 8}, Data: make([]float32, 32*8), Affine: volume.Affine{{2, 0, 0, 0}, {0, 2, 0, 0}, {0, 0, 3, 0}}}
	for k := range acq {
		acq[k] = volume.Unknown()
		acq[k].EchoTime, acq[k].RepetitionTime = 10*float64(k+1), 3000
		for v := 0; v < 32; v++ {
			im.Data[k*32+v] = float32(800 * math.Exp(-acq[k].EchoTime/60))
		}
	}
	im.Acq = acq
	src := filepath.Join(dir, "mese.nii.gz")
	if err := series.Write(src, im, nil); err != nil {
		panic(err)
	}
	c := &pipeline.Config{Series: src, Spec: fit.Spec{Model: "t2"}, NoMask: true, Workers: 2,
		Out: filepath.Join(dir, "maps"), Version: "example"}
	sum, err := pipeline.Run(context.Background(), c, nil)
	if err != nil {
		panic(err)
	}
	fmt.Printf("%s/%s: %d voxels, %d ok, %d slab\n", sum.Model, sum.Method, sum.Voxels, sum.Counts[fit.OK], sum.Slabs)
	names, _ := filepath.Glob(filepath.Join(c.Out, "T2map*"))
	for _, n := range names {
		fmt.Println(filepath.Base(n))
	}
	// Output:
	// t2/nlls: 32 voxels, 32 ok, 1 slab
	// T2map.json
	// T2map.nii.gz
	// T2map.png
	// T2map_sd.json
	// T2map_sd.nii.gz
}
