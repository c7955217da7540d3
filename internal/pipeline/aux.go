package pipeline

import (
	"fmt"
	"math"
	"sort"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/nifti"
	"github.com/tauvox/tauvox/volume"
)

// sameGrid checks that an auxiliary image lies on the series grid.
func sameGrid(path string, aux, im *volume.Image, what string) error {
	if aux.Dims[0] != im.Dims[0] || aux.Dims[1] != im.Dims[1] || aux.Dims[2] != im.Dims[2] {
		return fmt.Errorf("%s: %s is %d×%d×%d, the series %d×%d×%d", path, what,
			aux.Dims[0], aux.Dims[1], aux.Dims[2], im.Dims[0], im.Dims[1], im.Dims[2])
	}
	if aux.Dims[3] != 1 {
		return fmt.Errorf("%s: %s has %d volumes, want 1", path, what, aux.Dims[3])
	}
	if !volume.SameGrid(aux, im, 1e-3) {
		return fmt.Errorf("%s: %s has the series' size but another position or orientation (affine differs)", path, what)
	}
	return nil
}

func readMask(path string, im *volume.Image) ([]bool, error) {
	m, err := nifti.Read(path)
	if err != nil {
		return nil, err
	}
	if err := sameGrid(path, m, im, "mask"); err != nil {
		return nil, err
	}
	mask := make([]bool, len(m.Data))
	any := false
	for i, v := range m.Data {
		mask[i] = v > 0
		any = any || mask[i]
	}
	if !any {
		return nil, fmt.Errorf("%s: mask selects no voxel", path)
	}
	return mask, nil
}

// readB1 reads a relative B1 map; a map whose median is above 10 is taken
// to be in percent (BIDS TB1map recommends percent) and divided by 100.
func readB1(path string, im *volume.Image) ([]float32, error) {
	m, err := nifti.Read(path)
	if err != nil {
		return nil, err
	}
	if err := sameGrid(path, m, im, "B1 map"); err != nil {
		return nil, err
	}
	var pos []float64
	for _, v := range m.Data {
		if v > 0 && !math.IsInf(float64(v), 0) {
			pos = append(pos, float64(v))
		}
	}
	if len(pos) == 0 {
		return nil, fmt.Errorf("%s: B1 map holds no positive value", path)
	}
	sort.Float64s(pos)
	scale := float32(1)
	if pos[len(pos)/2] > 10 {
		scale = 0.01
	}
	out := make([]float32, len(m.Data))
	for i, v := range m.Data {
		out[i] = v * scale
	}
	return out, nil
}

// auxSlabs reads a 3-D map on the series grid (mask or B1) slab by slab.
type auxSlabs struct {
	r     *nifti.SlabReader
	buf   []float32
	scale float32 // applied to every value read (B1 in percent: 0.01)
}

// survey reads the map once, slab by slab, and counts its positive finite
// values and those at most 10: enough to tell whether the median of the
// positive values is above 10 (a B1 map in percent), as readB1 decides on
// the whole map, without holding it.
func (x *auxSlabs) survey(plan fit.SlabPlan, plane int) (pos, small int, err error) {
	for i := 0; i+1 < len(plan.Slabs); i++ {
		b, err := x.read(plan.Slabs[i], plan.Slabs[i+1], plane)
		if err != nil {
			return 0, 0, err
		}
		for _, v := range b {
			if v > 0 && !math.IsInf(float64(v), 0) {
				pos++
				if v <= 10 {
					small++
				}
			}
		}
	}
	return pos, small, nil
}

func openAux(path string, dims [4]int, affine volume.Affine, what, tmpDir string) (*auxSlabs, error) {
	r, err := nifti.OpenSlabs(path, &nifti.SlabOptions{TempDir: tmpDir})
	if err != nil {
		return nil, err
	}
	stub := &volume.Image{Dims: r.Dims(), Affine: r.Affine()}
	ref := &volume.Image{Dims: dims, Affine: affine}
	if err := sameGrid(path, stub, ref, what); err != nil {
		r.Close()
		return nil, err
	}
	return &auxSlabs{r: r}, nil
}

func (x *auxSlabs) read(z0, z1, plane int) ([]float32, error) {
	n := (z1 - z0) * plane
	if cap(x.buf) < n {
		x.buf = make([]float32, n)
	}
	x.buf = x.buf[:n]
	if err := x.r.ReadSlab(x.buf, z0, z1, nil); err != nil {
		return nil, err
	}
	if x.scale != 0 && x.scale != 1 {
		for i, v := range x.buf {
			x.buf[i] = v * x.scale
		}
	}
	return x.buf, nil
}
