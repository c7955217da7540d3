package phantom

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"github.com/tauvox/tauvox/internal/threshold"
	"github.com/tauvox/tauvox/volume"
)

// Placement is where a phantom lies in an image: its centre in scanner
// coordinates (RAS mm), its rotation in the slice plane, whether it lies
// face down (mirror image), and the slice it was found on.
//
// The phantom's own frame (x_mm, y_mm of the definition) maps to the scanner
// as
//
//	p = Center + R(Rotation)·(±x, y) in the plane basis (U, V),
//
// with x negated when Mirrored. U is the in-plane direction closest to the
// scanner's +x (right-to-left becomes … RAS +x), V = N × U, N the slice
// normal pointing to +z (superior) for axial slices; so for an axial slice
// the frame is RAS x and y, and Rotation turns counter-clockwise from +x
// towards +y, as in Scene.
type Placement struct {
	Center     [3]float64
	Rotation   float64 // degrees
	Mirrored   bool
	Slice      int
	U, V, N    [3]float64
	Confidence float64 // 0…1
	Residual   float64 // RMS mm between vial centres found and placed
	Method     string  // "found", "given", "mixed"
	// Plane is the fractional slice index of the spheres' plane when it
	// was found from the images (NaN otherwise).
	Plane float64
	// zbar is the height (z_mm) of the spheres' plane (hasSpheres).
	zbar float64
	// alts are the other distinct placements of nearly the best contrast
	// (at least altFraction of it), for the identity step.
	alts []*Placement
}

// altFraction is the contrast, relative to the best, down to which other
// distinct geometric placements are kept as identity candidates (tauvox's
// choice: a placement off by a vial spacing scores far lower).
const altFraction = 0.8

// Point maps a point of the phantom's plane (mm from its centre) to the
// scanner.
func (p *Placement) Point(x, y float64) [3]float64 {
	if p.Mirrored {
		x = -x
	}
	th := p.Rotation * math.Pi / 180
	a := x*math.Cos(th) - y*math.Sin(th)
	b := x*math.Sin(th) + y*math.Cos(th)
	var q [3]float64
	for d := 0; d < 3; d++ {
		q[d] = p.Center[d] + a*p.U[d] + b*p.V[d]
	}
	return q
}

// LocateOptions steers Locate; the zero value searches everything.
type LocateOptions struct {
	Center   *[3]float64 // given centre (scanner mm): not searched
	Rotation *float64    // given rotation (degrees): not searched
	Mirrored *bool       // given orientation
	Slice    *int        // given slice index
}

// ErrNoPhantom reports an image in which no phantom could be found.
var ErrNoPhantom = errors.New("no phantom found")

// Locate finds the phantom of def in the first volume of im (an M0 or
// first-echo image is best: vials and fill differ in signal).
//
// Method (tauvox's own; documented in docs/methods.md):
//
//  1. Slice: the slice with the largest object area (Otsu threshold of
//     the volume), the middle one among those within 5 % of the largest.
//  2. Start: the centroid of the object in that slice.
//  3. Score of a placement: for each vial, the mean image value inside
//     the vial's circle minus the mean in a 4 mm annulus outside it, in
//     absolute value, summed over vials (bilinear samples). It is largest
//     when every circle sits on its vial, edges included.
//  4. Search: rotation on a 2° grid for both faces, at the start centre and
//     a few shifted ones; the best candidates are refined by a shrinking
//     pattern search over (centre, rotation) to 0.01 mm and 0.01°.
//  5. Identity: candidates within 10 % of the best score are ranked by
//     how well the map matches the references when a Map is given.
//  6. Report: each vial's own best shift (a local search) gives the
//     residual; the confidence combines the score margin over the next
//     distinct candidate and the residual.
func Locate(im *volume.Image, def *Definition, opt *LocateOptions) (*Placement, error) {
	if opt == nil {
		opt = &LocateOptions{}
	}
	sl, err := newSlicer(im)
	if err != nil {
		return nil, err
	}
	k := 0
	if opt.Slice != nil {
		k = *opt.Slice
		if k < 0 || k >= im.Dims[2] {
			return nil, fmt.Errorf("slice %d outside the image (0…%d)", k, im.Dims[2]-1)
		}
	} else if k, err = sl.bestSlice(); err != nil {
		return nil, err
	} else if sph, _ := def.hasSpheres(); sph && im.Dims[2] > 1 {
		// Spheres show only on the slices near their plane, which need
		// not be the slab's middle.
		k = sl.busiestSlice(k)
	}
	sl.setSlice(k)
	pl := &Placement{Slice: k, U: sl.u, V: sl.v, N: sl.n, Method: "found", Plane: math.NaN()}
	start, ok := sl.centroid()
	if !ok {
		return nil, ErrNoPhantom
	}
	if opt.Center != nil {
		start = sl.project(*opt.Center)
	}
	given := 0
	for _, g := range []bool{opt.Center != nil, opt.Rotation != nil, opt.Mirrored != nil} {
		if g {
			given++
		}
	}
	switch given {
	case 3:
		pl.Method = "given"
	case 0:
	default:
		pl.Method = "mixed"
	}
	sc := &scorer{sl: sl, def: def}
	type cand struct {
		c      [3]float64
		th     float64
		mirror bool
		score  float64
	}
	var cands []cand
	mirrors := []bool{false, true}
	if opt.Mirrored != nil {
		mirrors = []bool{*opt.Mirrored}
	}
	angles := make([]float64, 0, 180)
	if opt.Rotation != nil {
		angles = append(angles, *opt.Rotation)
	} else {
		for a := 0.0; a < 360; a += 2 {
			angles = append(angles, a)
		}
	}
	// Start centres: the centroid, and shifts of a quarter of the smallest
	// vial radius… up to 6 mm around it (the centroid of an asymmetric
	// layout is off the body centre by a few mm).
	starts := [][3]float64{start}
	if opt.Center == nil {
		for _, d := range [][2]float64{{-6, 0}, {6, 0}, {0, -6}, {0, 6}} {
			var c [3]float64
			for x := 0; x < 3; x++ {
				c[x] = start[x] + d[0]*sl.u[x] + d[1]*sl.v[x]
			}
			starts = append(starts, c)
		}
	}
	sc.coarse = true
	for _, m := range mirrors {
		for _, c := range starts {
			for _, a := range angles {
				cands = append(cands, cand{c, a, m, sc.score(c, a, m)})
			}
		}
	}
	sc.coarse = false
	sort.Slice(cands, func(i, j int) bool { return cands[i].score > cands[j].score })
	// Refine the best few distinct candidates.
	var refined []cand
	for _, c := range cands {
		if len(refined) >= 8 {
			break
		}
		dup := false
		for _, r := range refined {
			if r.mirror == c.mirror && angleDiff(r.th, c.th) < 10 && dist(r.c, c.c) < 8 {
				dup = true
				break
			}
		}
		if dup {
			continue
		}
		cc, th := sc.refine(c.c, c.th, c.mirror, opt.Center == nil, opt.Rotation == nil)
		refined = append(refined, cand{cc, th, c.mirror, sc.score(cc, th, c.mirror)})
	}
	// Merge refinements that converged to the same placement.
	sort.Slice(refined, func(i, j int) bool { return refined[i].score > refined[j].score })
	var uniq []cand
	for _, r := range refined {
		dup := false
		for _, u := range uniq {
			if u.mirror == r.mirror && angleDiff(u.th, r.th) < 3 && dist(u.c, r.c) < 2 {
				dup = true
			}
		}
		if !dup {
			uniq = append(uniq, r)
		}
	}
	best := uniq[0]
	if !(best.score > 0) {
		return nil, ErrNoPhantom
	}
	chosen := 0
	win := uniq[chosen]
	pl.Center, pl.Rotation, pl.Mirrored = win.c, math.Mod(win.th+360, 360), win.mirror
	// Confidence: margin over the next distinct candidate that is not a
	// symmetric image of the chosen one (those fit the outlines equally
	// by construction; the values tell them apart), and residual.
	syms := def.Symmetries()
	image := func(u cand) bool {
		for k := range syms {
			q := compose(pl, &syms[k])
			if q.Mirrored == u.mirror && angleDiff(q.Rotation, u.th) < 3 && dist(q.Center, u.c) < 2 {
				return true
			}
		}
		return false
	}
	margin, others := 1.0, false
	for i, u := range uniq {
		if i != chosen && !image(u) {
			margin, others = math.Min(margin, 1-u.score/win.score), true
			break
		}
	}
	pl.Residual = sc.residual(pl)
	for i, u := range uniq {
		if i != chosen && u.score >= altFraction*win.score && !image(u) {
			a := *pl
			a.Center, a.Rotation, a.Mirrored, a.alts = u.c, math.Mod(u.th+360, 360), u.mirror, nil
			a.Residual = sc.residual(&a)
			pl.alts = append(pl.alts, &a)
		}
	}
	if sph, zbar := def.hasSpheres(); sph && im.Dims[2] > 1 && opt.Slice == nil {
		pl.zbar = zbar
		locatePlane(sc, pl, zbar)
		for _, a := range pl.alts {
			a.zbar = zbar
			locatePlane(sc, a, zbar)
		}
	}
	// 1 when the placement beats every other distinct one (symmetric
	// images aside) by at least 5 % of its score and each vial's own best
	// position agrees with it; lower as another placement scores nearly as
	// well or the vials disagree (e^(−residual / 2 mm)). A geometric
	// measure: the identity's margin is Identify's.
	pl.Confidence = math.Exp(-pl.Residual / 2)
	if others {
		pl.Confidence *= clamp01(margin / 0.05)
	}
	return pl, nil
}

func clamp01(x float64) float64 { return math.Max(0, math.Min(1, x)) }

func angleDiff(a, b float64) float64 {
	d := math.Mod(math.Abs(a-b), 360)
	return math.Min(d, 360-d)
}

func dist(a, b [3]float64) float64 {
	return math.Sqrt((a[0]-b[0])*(a[0]-b[0]) + (a[1]-b[1])*(a[1]-b[1]) + (a[2]-b[2])*(a[2]-b[2]))
}

// slicer samples one slice of an image in scanner coordinates.
type slicer struct {
	im      *volume.Image
	inv     volume.Affine
	u, v, n [3]float64
	k       int
	thr     float64
}

func newSlicer(im *volume.Image) (*slicer, error) {
	inv, ok := im.Affine.Inverse()
	if !ok {
		return nil, errors.New("image affine is singular")
	}
	s := &slicer{im: im, inv: inv}
	a := im.Affine
	col := func(c int) [3]float64 { return [3]float64{a[0][c], a[1][c], a[2][c]} }
	n := cross(col(0), col(1))
	n = unit(n)
	if n[2] < 0 || (n[2] == 0 && (n[1] < 0 || (n[1] == 0 && n[0] < 0))) {
		n = [3]float64{-n[0], -n[1], -n[2]}
	}
	// U: +x projected into the plane (or +y when the plane is sagittal).
	x := [3]float64{1, 0, 0}
	if math.Abs(n[0]) > 0.9 {
		x = [3]float64{0, 1, 0}
	}
	d := dot(x, n)
	u := unit([3]float64{x[0] - d*n[0], x[1] - d*n[1], x[2] - d*n[2]})
	s.u, s.n = u, n
	s.v = cross(n, u)
	s.thr = otsuVolume(im)
	if !(s.thr > 0) {
		return nil, ErrNoPhantom
	}
	return s, nil
}

func cross(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}
func dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }
func unit(a [3]float64) [3]float64 {
	l := math.Sqrt(dot(a, a))
	return [3]float64{a[0] / l, a[1] / l, a[2] / l}
}

// otsuVolume returns Otsu's threshold of the first volume.
func otsuVolume(im *volume.Image) float64 { return threshold.Otsu(im.Volume(0)) }

// bestSlice picks the slice with the largest object area.
func (s *slicer) bestSlice() (int, error) {
	nx, ny, nz := s.im.Dims[0], s.im.Dims[1], s.im.Dims[2]
	area := make([]int, nz)
	top := 0
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				if float64(s.im.Data[i+nx*(j+ny*k)]) >= s.thr {
					area[k]++
				}
			}
		}
		top = max(top, area[k])
	}
	if top == 0 {
		return 0, ErrNoPhantom
	}
	var ks []int
	for k, a := range area {
		if float64(a) >= 0.95*float64(top) {
			ks = append(ks, k)
		}
	}
	return ks[len(ks)/2], nil
}

// busiestSlice returns, among the slices whose object area is at least half
// the largest, the one whose object voxels vary most (SD above the Otsu
// threshold): the spheres' contrast adds to the spread where a slice cuts
// them. It returns fallback when no slice qualifies.
func (s *slicer) busiestSlice(fallback int) int {
	nx, ny, nz := s.im.Dims[0], s.im.Dims[1], s.im.Dims[2]
	area := make([]int, nz)
	sd := make([]float64, nz)
	top := 0
	for k := 0; k < nz; k++ {
		var sum, sum2 float64
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				v := float64(s.im.Data[i+nx*(j+ny*k)])
				if v >= s.thr {
					area[k]++
					sum += v
					sum2 += v * v
				}
			}
		}
		if n := float64(area[k]); n > 1 {
			sd[k] = math.Sqrt(math.Max(0, (sum2-sum*sum/n)/(n-1)))
		}
		top = max(top, area[k])
	}
	best := fallback
	for k := 0; k < nz; k++ {
		if 2*area[k] >= top && sd[k] > sd[best] {
			best = k
		}
	}
	return best
}

// Slices returns the slices whose object area is at least frac of the
// largest (the interior of a cylindrical phantom).
func Slices(im *volume.Image, frac float64) []int {
	s, err := newSlicer(im)
	if err != nil {
		return nil
	}
	nx, ny, nz := im.Dims[0], im.Dims[1], im.Dims[2]
	area := make([]int, nz)
	top := 0
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			for i := 0; i < nx; i++ {
				if float64(im.Data[i+nx*(j+ny*k)]) >= s.thr {
					area[k]++
				}
			}
		}
		top = max(top, area[k])
	}
	var ks []int
	for k, a := range area {
		if top > 0 && float64(a) >= frac*float64(top) {
			ks = append(ks, k)
		}
	}
	return ks
}

func (s *slicer) setSlice(k int) { s.k = k }

// centroid returns the centroid of the object in the current slice.
func (s *slicer) centroid() ([3]float64, bool) {
	nx, ny := s.im.Dims[0], s.im.Dims[1]
	var si, sj, n float64
	for j := 0; j < ny; j++ {
		for i := 0; i < nx; i++ {
			if float64(s.im.Data[i+nx*(j+ny*s.k)]) >= s.thr {
				si += float64(i)
				sj += float64(j)
				n++
			}
		}
	}
	if n == 0 {
		return [3]float64{}, false
	}
	x, y, z := s.im.Affine.Apply(si/n, sj/n, float64(s.k))
	return [3]float64{x, y, z}, true
}

// project moves a scanner point onto the current slice plane.
func (s *slicer) project(p [3]float64) [3]float64 {
	i, j, _ := s.inv.Apply(p[0], p[1], p[2])
	x, y, z := s.im.Affine.Apply(i, j, float64(s.k))
	return [3]float64{x, y, z}
}

// scorer evaluates placements of a definition on a slice.
type scorer struct {
	sl     *slicer
	def    *Definition
	coarse bool
	pts    map[[2]float64][2][][2]float64 // (radius, div) → in, out
}

func (sc *scorer) offsets(r float64) (in, out [][2]float64) {
	div := 6.0
	if sc.coarse {
		div = 3
	}
	if sc.pts == nil {
		sc.pts = map[[2]float64][2][][2]float64{}
	}
	key := [2]float64{r, div}
	o, ok := sc.pts[key]
	if !ok {
		in, out := offsets(r, div)
		o = [2][][2]float64{in, out}
		sc.pts[key] = o
	}
	return o[0], o[1]
}

// offsets returns the circle and annulus sample points (phantom-plane mm,
// relative to the vial centre) for radius r, about div points across a
// radius.
func offsets(r float64, div float64) (in, out [][2]float64) {
	step := math.Max(r/div, 0.5)
	for x := -r; x <= r; x += step {
		for y := -r; y <= r; y += step {
			if x*x+y*y <= r*r {
				in = append(in, [2]float64{x, y})
			}
		}
	}
	for _, rr := range []float64{r + 1.5, r + 3} {
		n := int(2 * math.Pi * rr / step)
		for t := 0; t < n; t++ {
			a := 2 * math.Pi * float64(t) / float64(n)
			out = append(out, [2]float64{rr * math.Cos(a), rr * math.Sin(a)})
		}
	}
	return in, out
}

func (sc *scorer) place(c [3]float64, th float64, mirror bool) *Placement {
	return &Placement{Center: c, Rotation: th, Mirrored: mirror, U: sc.sl.u, V: sc.sl.v, N: sc.sl.n}
}

// frame maps phantom-plane points of a placement straight to voxel
// coordinates (i, j) of the slicer's grid: one rotation and one affine
// inversion per placement instead of per sample point.
type frame struct {
	ci, cj         float64
	ai, aj, bi, bj float64 // voxel steps per mm of the placement's a and b axes
	cos, sin, sx   float64
}

func (s *slicer) frame(p *Placement) frame {
	th := p.Rotation * math.Pi / 180
	f := frame{cos: math.Cos(th), sin: math.Sin(th), sx: 1}
	if p.Mirrored {
		f.sx = -1
	}
	f.ci, f.cj, _ = s.inv.Apply(p.Center[0], p.Center[1], p.Center[2])
	m := s.inv
	f.ai = m[0][0]*p.U[0] + m[0][1]*p.U[1] + m[0][2]*p.U[2]
	f.aj = m[1][0]*p.U[0] + m[1][1]*p.U[1] + m[1][2]*p.U[2]
	f.bi = m[0][0]*p.V[0] + m[0][1]*p.V[1] + m[0][2]*p.V[2]
	f.bj = m[1][0]*p.V[0] + m[1][1]*p.V[1] + m[1][2]*p.V[2]
	return f
}

// at returns the voxel coordinates of the phantom-plane point (x, y), as
// Placement.Point followed by the inverse affine does.
func (f *frame) at(x, y float64) (float64, float64) {
	x *= f.sx
	a := x*f.cos - y*f.sin
	b := x*f.sin + y*f.cos
	return f.ci + a*f.ai + b*f.bi, f.cj + a*f.aj + b*f.bj
}

// sampleIJ is sample at voxel coordinates of the current slice.
func (s *slicer) sampleIJ(fi, fj float64) (float64, bool) {
	nx, ny := s.im.Dims[0], s.im.Dims[1]
	if !(fi >= 0 && fj >= 0 && fi <= float64(nx-1) && fj <= float64(ny-1)) {
		return 0, false
	}
	i0, j0 := int(fi), int(fj)
	i1, j1 := min(i0+1, nx-1), min(j0+1, ny-1)
	a, b := fi-float64(i0), fj-float64(j0)
	off := nx * ny * s.k
	d := s.im.Data
	v := (1-a)*(1-b)*float64(d[off+i0+nx*j0]) + a*(1-b)*float64(d[off+i1+nx*j0]) +
		(1-a)*b*float64(d[off+i0+nx*j1]) + a*b*float64(d[off+i1+nx*j1])
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return 0, false
	}
	return v, true
}

// contrastAt returns |mean inside − mean outside| of vial v for the
// placement of frame f, with an extra shift (dx, dy) in the phantom plane.
func (sc *scorer) contrastAt(f *frame, v *Vial, dx, dy float64) (float64, bool) {
	in, out := sc.offsets(v.Radius)
	mean := func(pts [][2]float64) (float64, bool) {
		var s float64
		n := 0
		for _, o := range pts {
			if val, ok := sc.sl.sampleIJ(f.at(v.X+dx+o[0], v.Y+dy+o[1])); ok {
				s += val
				n++
			}
		}
		if n < len(pts)/2 {
			return 0, false
		}
		return s / float64(n), true
	}
	mi, ok1 := mean(in)
	mo, ok2 := mean(out)
	if !ok1 || !ok2 {
		return 0, false
	}
	return math.Abs(mi - mo), true
}

func (sc *scorer) score(c [3]float64, th float64, mirror bool) float64 {
	p := sc.place(c, th, mirror)
	f := sc.sl.frame(p)
	var s float64
	for i := range sc.def.Vials {
		if v, ok := sc.contrastAt(&f, &sc.def.Vials[i], 0, 0); ok {
			s += v
		}
	}
	return s
}

// refine runs a shrinking pattern search on the score.
func (sc *scorer) refine(c [3]float64, th float64, mirror, moveC, moveTh bool) ([3]float64, float64) {
	best := sc.score(c, th, mirror)
	step, astep := 2.0, 2.0
	for step > 0.01 || astep > 0.01 {
		improved := false
		try := func(c2 [3]float64, th2 float64) {
			if s := sc.score(c2, th2, mirror); s > best {
				best, c, th, improved = s, c2, th2, true
			}
		}
		if moveC {
			for _, d := range [][2]float64{{1, 0}, {-1, 0}, {0, 1}, {0, -1}} {
				var c2 [3]float64
				for x := 0; x < 3; x++ {
					c2[x] = c[x] + step*(d[0]*sc.sl.u[x]+d[1]*sc.sl.v[x])
				}
				try(c2, th)
			}
		}
		if moveTh {
			try(c, th+astep)
			try(c, th-astep)
		}
		if !improved {
			step /= 2
			astep /= 2
			if !moveC {
				step = 0
			}
			if !moveTh {
				astep = 0
			}
		}
	}
	return c, th
}

// residual returns the RMS of each vial's own best shift from the placement
// (a local pattern search per vial), over vials with contrast.
func (sc *scorer) residual(p *Placement) float64 {
	var ss float64
	n := 0
	f := sc.sl.frame(p)
	for i := range sc.def.Vials {
		v := &sc.def.Vials[i]
		best, ok := sc.contrastAt(&f, v, 0, 0)
		if !ok || best == 0 {
			continue
		}
		dx, dy, step := 0.0, 0.0, 1.0
		for step > 0.02 {
			moved := false
			for _, d := range [][2]float64{{1, 0}, {-1, 0}, {0, 1}, {0, -1}} {
				if s, ok := sc.contrastAt(&f, v, dx+step*d[0], dy+step*d[1]); ok && s > best {
					best, dx, dy, moved = s, dx+step*d[0], dy+step*d[1], true
				}
			}
			if !moved {
				step /= 2
			}
			if math.Hypot(dx, dy) > v.Radius {
				break
			}
		}
		ss += dx*dx + dy*dy
		n++
	}
	if n == 0 {
		return math.NaN()
	}
	return math.Sqrt(ss / float64(n))
}
