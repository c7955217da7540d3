package phantom

import (
	"math"
	"sort"
)

// Symmetry is a turn of the phantom's plane about its centre, after an
// optional turn face down (x → −x, z → −z), that carries the vial layout,
// as a slice sees it, onto itself: every vial's circle (centre x, y and
// radius) lands on another's. Heights and shapes are left aside: a slice
// through a sphere's centre shows the same circle as a cylinder, and a
// vial outside the imaged slab shows nothing, so the images cannot rule
// such placements out; the values decide. Perm[i] is the vial that vial i
// lands on.
type Symmetry struct {
	Rotation float64 // degrees, counter-clockwise
	Mirrored bool
	Perm     []int
}

// symmetryTol is how far (mm) a vial may land from another one and still
// count as landing on it: geometry cannot tell such placements apart
// (about half a voxel of a typical phantom scan; tauvox's choice).
const symmetryTol = 1.5

// apply maps a phantom-plane point by the symmetry (mirror first).
func (s *Symmetry) apply(x, y, z float64) (float64, float64, float64) {
	if s.Mirrored {
		x, z = -x, -z
	}
	th := s.Rotation * math.Pi / 180
	return x*math.Cos(th) - y*math.Sin(th), x*math.Sin(th) + y*math.Cos(th), z
}

// Symmetries returns every symmetry of the definition's vial layout,
// the identity first. A layout with no symmetry gives the identity alone;
// n vials on an evenly spaced ring give 2n (n turns, each face up and
// down); a square grid gives 8.
//
// Candidates are the turns that carry the vial farthest from the centre
// (the anchor) onto each vial at the same distance, for both faces; each
// is kept when it carries every vial onto a vial of the same shape and
// radius (within symmetryTol mm and 0.5 mm of radius).
func (d *Definition) Symmetries() []Symmetry {
	n := len(d.Vials)
	id := Symmetry{Perm: make([]int, n)}
	for i := range id.Perm {
		id.Perm[i] = i
	}
	out := []Symmetry{id}
	if n == 0 {
		return out
	}
	a := 0
	for i := range d.Vials {
		if math.Hypot(d.Vials[i].X, d.Vials[i].Y) > math.Hypot(d.Vials[a].X, d.Vials[a].Y) {
			a = i
		}
	}
	ra := math.Hypot(d.Vials[a].X, d.Vials[a].Y)
	for _, mirror := range []bool{false, true} {
		var angles []float64
		if ra < symmetryTol {
			// Every vial sits at the centre: only the faces differ.
			angles = []float64{0}
		} else {
			ax := d.Vials[a].X
			if mirror {
				ax = -ax
			}
			from := math.Atan2(d.Vials[a].Y, ax)
			for j := range d.Vials {
				if math.Abs(math.Hypot(d.Vials[j].X, d.Vials[j].Y)-ra) > symmetryTol {
					continue
				}
				deg := (math.Atan2(d.Vials[j].Y, d.Vials[j].X) - from) * 180 / math.Pi
				angles = append(angles, math.Mod(deg+720, 360))
			}
		}
		for _, th := range angles {
			s := Symmetry{Rotation: th, Mirrored: mirror}
			if !mirror && angleDiff(th, 0) < 1e-6 {
				continue // the identity, already first
			}
			if perm, ok := d.landing(&s); ok {
				s.Perm = perm
				if !hasSymmetry(out, &s) {
					out = append(out, s)
				}
			}
		}
	}
	sort.SliceStable(out[1:], func(i, j int) bool {
		a, b := out[1+i], out[1+j]
		if a.Mirrored != b.Mirrored {
			return !a.Mirrored
		}
		return a.Rotation < b.Rotation
	})
	return out
}

func hasSymmetry(list []Symmetry, s *Symmetry) bool {
	for i := range list {
		same := true
		for k := range s.Perm {
			if list[i].Perm[k] != s.Perm[k] {
				same = false
				break
			}
		}
		if same {
			return true
		}
	}
	return false
}

// landing returns, for each vial, the vial it lands on under s, and false
// when some vial lands on none (or two on one).
func (d *Definition) landing(s *Symmetry) ([]int, bool) {
	perm := make([]int, len(d.Vials))
	used := make([]bool, len(d.Vials))
	for i := range d.Vials {
		v := &d.Vials[i]
		x, y, _ := s.apply(v.X, v.Y, 0)
		found := -1
		for j := range d.Vials {
			w := &d.Vials[j]
			if used[j] || math.Abs(w.Radius-v.Radius) > 0.5 {
				continue
			}
			if math.Hypot(x-w.X, y-w.Y) <= symmetryTol {
				found = j
				break
			}
		}
		if found < 0 {
			return nil, false
		}
		used[found] = true
		perm[i] = found
	}
	return perm, true
}

// compose returns the placement p followed by the symmetry s of the
// phantom's own plane: the phantom point q goes where p puts s(q). The
// centre and plane stay; rotation and face change.
func compose(p *Placement, s *Symmetry) *Placement {
	q := *p
	// p's 2×2 map is R(θp)·F(mp), s's is R(θs)·F(ms), F(m) = diag(−1, 1)
	// when m. R(θ)·F = F·R(−θ), so R(θp)·F(mp)·R(θs)·F(ms) =
	// R(θp ± θs)·F(mp ≠ ms), with − when mp.
	if p.Mirrored {
		q.Rotation = p.Rotation - s.Rotation
	} else {
		q.Rotation = p.Rotation + s.Rotation
	}
	q.Rotation = math.Mod(q.Rotation+720, 360)
	q.Mirrored = p.Mirrored != s.Mirrored
	q.alts = nil
	// Keep the spheres' plane where it is: the centre lies zbar from it
	// along the axis, on the side the face decides.
	sp, sq := 1.0, 1.0
	if p.Mirrored {
		sp = -1
	}
	if q.Mirrored {
		sq = -1
	}
	for d := 0; d < 3; d++ {
		q.Center[d] += (sp - sq) * p.zbar * p.N[d]
	}
	return &q
}
