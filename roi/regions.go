package roi

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"sort"
	"strconv"
	"strings"

	"github.com/tauvox/tauvox/internal/regular"
	"github.com/tauvox/tauvox/volume"
)

// Sphere spaces of a region list.
const (
	SpaceMM    = "mm"    // scanner coordinates, RAS, as in the maps' NIfTI affine
	SpaceVoxel = "voxel" // 0-based i, j, k of the maps
)

// Spec is one region of a region list: a sphere of Radius (mm, or voxels
// in voxel space) around (X, Y, Z).
type Spec struct {
	Name   string  `json:"name"`
	X      float64 `json:"x"`
	Y      float64 `json:"y"`
	Z      float64 `json:"z"`
	Radius float64 `json:"radius"`
	Space  string  `json:"space"`
}

// Region is a named set of voxel indices of one volume of a grid.
type Region struct {
	Name  string
	Index []int
	// Center is the region's centre in scanner mm (for spheres) or its
	// centroid (for labels).
	Center [3]float64
}

// maxRegions bounds a region list.
const maxRegions = 100000

// MaxRegionVoxels bounds the voxel indices all regions of one call to
// Spheres may hold together (8 bytes each: 512 MiB), checked while the
// regions are made so that a list of many large spheres is refused before
// it exhausts memory.
const MaxRegionVoxels = 1 << 26

// maxLabel is the largest label value a label image may carry: samples are
// float32, which hold every whole number up to 2^24 exactly (IEEE 754
// binary32, 24-bit significand) and no longer tell 2^24+1 from 2^24.
const maxLabel = 1 << 24

// ReadList reads a region list: CSV with the header name,x,y,z,radius,space
// or a JSON list of objects with those keys (chosen by the first
// non-blank byte).
func ReadList(path string) ([]Spec, error) {
	b, err := regular.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseList(b, path)
}

// ParseList parses a region list; name is used in errors.
func ParseList(b []byte, name string) ([]Spec, error) {
	t := bytes.TrimSpace(b)
	var specs []Spec
	var err error
	if len(t) > 0 && t[0] == '[' {
		specs, err = parseJSON(t)
	} else {
		specs, err = parseCSV(b)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: region list: %v", name, err)
	}
	if len(specs) == 0 {
		return nil, fmt.Errorf("%s: region list holds no region", name)
	}
	seen := map[string]bool{}
	for i, s := range specs {
		if err := s.check(); err != nil {
			return nil, fmt.Errorf("%s: region %d (%q): %v", name, i+1, s.Name, err)
		}
		if seen[s.Name] {
			return nil, fmt.Errorf("%s: region name %q appears twice", name, s.Name)
		}
		seen[s.Name] = true
	}
	return specs, nil
}

func (s *Spec) check() error {
	if strings.TrimSpace(s.Name) == "" {
		return errors.New("no name")
	}
	for _, v := range []float64{s.X, s.Y, s.Z, s.Radius} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return errors.New("coordinates and radius must be finite")
		}
	}
	if !(s.Radius > 0) {
		return errors.New("radius must be positive")
	}
	if s.Space != SpaceMM && s.Space != SpaceVoxel {
		return fmt.Errorf("space %q, want mm or voxel", s.Space)
	}
	return nil
}

func parseJSON(b []byte) ([]Spec, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var specs []Spec
	if err := dec.Decode(&specs); err != nil {
		return nil, err
	}
	if len(specs) > maxRegions {
		return nil, fmt.Errorf("more than %d regions", maxRegions)
	}
	return specs, nil
}

func parseCSV(b []byte) ([]Spec, error) {
	r := csv.NewReader(bytes.NewReader(b))
	r.Comment = '#'
	r.TrimLeadingSpace = true
	head, err := r.Read()
	if err == io.EOF {
		return nil, errors.New("empty file")
	}
	if err != nil {
		return nil, err
	}
	want := []string{"name", "x", "y", "z", "radius", "space"}
	for i := range head {
		head[i] = strings.ToLower(strings.TrimSpace(strings.TrimPrefix(head[i], "\ufeff")))
	}
	if strings.Join(head, ",") != strings.Join(want, ",") {
		return nil, fmt.Errorf("header %q, want %q", strings.Join(head, ","), strings.Join(want, ","))
	}
	var specs []Spec
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, err
		}
		line, _ := r.FieldPos(0)
		if len(specs) >= maxRegions {
			return nil, fmt.Errorf("more than %d regions", maxRegions)
		}
		s := Spec{Name: strings.TrimSpace(rec[0]), Space: strings.ToLower(strings.TrimSpace(rec[5]))}
		for k, dst := range []*float64{&s.X, &s.Y, &s.Z, &s.Radius} {
			v, err := strconv.ParseFloat(strings.TrimSpace(rec[k+1]), 64)
			if err != nil {
				return nil, fmt.Errorf("line %d: %s %q is not a number", line, want[k+1], rec[k+1])
			}
			*dst = v
		}
		specs = append(specs, s)
	}
	return specs, nil
}

// Spheres turns region specs into regions of grid im (one volume),
// shrinking each radius by erode mm (voxel-space radii are converted
// with the smallest voxel size). A region that holds no voxel of the image
// (outside it, or eroded away) is an error naming it.
func Spheres(im *volume.Image, specs []Spec, erode float64) ([]Region, error) {
	return spheres(im, specs, erode, MaxRegionVoxels)
}

// spheres is Spheres with the voxel limit given.
func spheres(im *volume.Image, specs []Spec, erode float64, limit int) ([]Region, error) {
	vs := im.Affine.VoxelSize()
	minVox := math.Min(vs[0], math.Min(vs[1], vs[2]))
	var out []Region
	total := 0
	for _, s := range specs {
		c := [3]float64{s.X, s.Y, s.Z}
		r := s.Radius
		if s.Space == SpaceVoxel {
			x, y, z := im.Affine.Apply(s.X, s.Y, s.Z)
			c = [3]float64{x, y, z}
			r = s.Radius * minVox
		}
		r -= erode
		if !(r > 0) {
			return nil, fmt.Errorf("region %q: radius %g mm leaves nothing after --erode %g mm", s.Name, r+erode, erode)
		}
		idx := sphere(im, c, r, limit-total)
		if len(idx) == 0 {
			return nil, fmt.Errorf("region %q at (%g, %g, %g) %s holds no voxel of the image", s.Name, s.X, s.Y, s.Z, s.Space)
		}
		if total += len(idx); total > limit {
			return nil, fmt.Errorf("the regions up to %q hold more than %d voxels in all (each voxel counted once per region it lies in), the limit; use fewer or smaller regions", s.Name, limit)
		}
		out = append(out, Region{Name: s.Name, Index: idx, Center: c})
	}
	return out, nil
}

// Labels turns a label image into regions of the grid im: each positive
// integer label is a region named by its value. When the label image lies
// on another grid, each voxel of im takes the label at the nearest label
// voxel of its centre (nearest-neighbour resampling through both affines).
// erode, when positive, drops voxels closer than erode mm to a voxel of
// another label or of the background.
func Labels(im, labels *volume.Image, erode float64) ([]Region, error) {
	nx, ny, nz := im.Dims[0], im.Dims[1], im.Dims[2]
	lab := make([]int, nx*ny*nz)
	same := volume.SameGrid(im, labels, 1e-4)
	inv, ok := labels.Affine.Inverse()
	if !ok {
		return nil, errors.New("label image affine is singular")
	}
	lx, ly, lz := labels.Dims[0], labels.Dims[1], labels.Dims[2]
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				v := i + nx*(j+ny*k)
				var f float32
				if same {
					f = labels.Data[v]
				} else {
					x, y, z := im.Affine.Apply(float64(i), float64(j), float64(k))
					a, b, c := inv.Apply(x, y, z)
					ai, bi, ci := int(math.Round(a)), int(math.Round(b)), int(math.Round(c))
					if ai < 0 || bi < 0 || ci < 0 || ai >= lx || bi >= ly || ci >= lz {
						continue
					}
					f = labels.Data[ai+lx*(bi+ly*ci)]
				}
				switch {
				case f == 0 || f < 0:
				case f != float32(math.Round(float64(f))):
					return nil, fmt.Errorf("label value %g at voxel (%d, %d, %d) is not a whole number: not a label image (resampled with interpolation?)", f, i, j, k)
				case f > maxLabel:
					return nil, fmt.Errorf("label value %g at voxel (%d, %d, %d) is above %d, the largest label whose neighbours float32 samples still tell apart", f, i, j, k, maxLabel)
				default:
					lab[v] = int(f)
				}
			}
		}
	}
	if erode > 0 {
		lab = erodeLabels(im, lab, erode)
	}
	byLabel := map[int][]int{}
	for v, l := range lab {
		if l > 0 {
			byLabel[l] = append(byLabel[l], v)
		}
	}
	if len(byLabel) == 0 {
		return nil, errors.New("label image holds no positive label on the maps' grid")
	}
	keys := make([]int, 0, len(byLabel))
	for l := range byLabel {
		keys = append(keys, l)
	}
	sort.Ints(keys)
	var out []Region
	for _, l := range keys {
		idx := byLabel[l]
		var c [3]float64
		for _, v := range idx {
			i, j, k := v%nx, (v/nx)%ny, v/(nx*ny)
			x, y, z := im.Affine.Apply(float64(i), float64(j), float64(k))
			c[0] += x
			c[1] += y
			c[2] += z
		}
		for d := range c {
			c[d] /= float64(len(idx))
		}
		out = append(out, Region{Name: strconv.Itoa(l), Index: idx, Center: c})
	}
	return out, nil
}

// erodeLabels clears voxels within d mm of a voxel carrying another label.
func erodeLabels(im *volume.Image, lab []int, d float64) []int {
	nx, ny, nz := im.Dims[0], im.Dims[1], im.Dims[2]
	vs := im.Affine.VoxelSize()
	ri, rj, rk := int(math.Ceil(d/vs[0])), int(math.Ceil(d/vs[1])), int(math.Ceil(d/vs[2]))
	out := make([]int, len(lab))
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				v := i + nx*(j+ny*k)
				l := lab[v]
				if l == 0 {
					continue
				}
				keep := true
			scan:
				for dk := -rk; dk <= rk; dk++ {
					for dj := -rj; dj <= rj; dj++ {
						for di := -ri; di <= ri; di++ {
							a, b, c := i+di, j+dj, k+dk
							dist := math.Sqrt(sq(float64(di)*vs[0]) + sq(float64(dj)*vs[1]) + sq(float64(dk)*vs[2]))
							if dist > d {
								continue
							}
							if a < 0 || b < 0 || c < 0 || a >= nx || b >= ny || c >= nz {
								continue // the image edge is not a boundary
							}
							if lab[a+nx*(b+ny*c)] != l {
								keep = false
								break scan
							}
						}
					}
				}
				if keep {
					out[v] = l
				}
			}
		}
	}
	return out
}

func sq(x float64) float64 { return x * x }
