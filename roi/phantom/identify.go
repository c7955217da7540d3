package phantom

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// MatchCap is the cap c of the match measure: a vial's mismatch counts as
// min(|ln(measured/reference)|, c). ln 1.5: beyond a factor of 1.5 a vial
// simply does not match, however far off it is, so a few bad vials cannot
// outweigh the rest (a truncated absolute log-ratio; tauvox's choice).
var MatchCap = math.Log(1.5)

// IdentityThreshold is the smallest identity margin, in units of the SD
// that noise alone would give the margin, for which the values are taken
// to tell the placements apart: noise alone exceeds 4 SD about once in
// 30 000 (one-sided normal tail). The identification tests show correct
// identities far above it and ambiguous ones at or near 0
// (docs/methods.md, docs/validation.md).
const IdentityThreshold = 4.0

// minIdentityVials is the fewest measured vials with a reference for the
// values to decide between placements.
const minIdentityVials = 3

// noiseFloor is the smallest noise scale (log units): 1 % (tauvox's
// choice), or the largest reference uncertainty when that is larger.
const noiseFloor = 0.01

// MatchMeasure names the match measure in reports.
const MatchMeasure = "mean over vials and quantities of min(|ln(measured median / reference)|, ln 1.5)"

// identityInput is one map of a group with its references (by vial
// index; 0 when none) and the slices of its cylinders.
type identityInput struct {
	in     *Input
	ref    []float64
	refUnc []float64 // per vial, %
	unc    float64   // largest of refUnc
	slices []int
}

// candidate is one placement with its measurements per input.
type candidate struct {
	pl   *Placement
	meas [][]VialQA
	cost float64
	n    int // vials measured
	sym  bool
}

// identify evaluates every placement the geometry allows (base composed
// with each symmetry of the layout, and base's other geometric candidates)
// on the group's maps, and returns the chosen placement and the identity
// report. fixRot and fixFace restrict the choice to placements with that
// rotation or face; with both the placement is given.
func identify(def *Definition, ins []identityInput, base *Placement, fixRot *float64, fixFace *bool, frac float64, minN int) (*Placement, [][]VialQA, IdentityGroup, error) {
	syms := def.Symmetries()
	var cands []*candidate
	add := func(p *Placement, sym bool) {
		for _, c := range cands {
			if c.pl.Mirrored == p.Mirrored && angleDiff(c.pl.Rotation, p.Rotation) < 3 && dist(c.pl.Center, p.Center) < 2 {
				return
			}
		}
		cands = append(cands, &candidate{pl: p, sym: sym})
	}
	for i := range syms {
		add(compose(base, &syms[i]), true)
	}
	for _, a := range base.alts {
		add(a, false)
	}
	g := IdentityGroup{Symmetries: len(syms), Placements: len(cands), Residual: base.Residual, Status: IdentityFound}
	for _, in := range ins {
		g.Quantities = append(g.Quantities, in.in.Quantity)
	}
	unc := 0.0
	for _, in := range ins {
		unc = math.Max(unc, in.unc)
	}
	for _, c := range cands {
		for _, in := range ins {
			m, err := Measure(in.in.Map, in.in.Status, c.pl, def, in.in.Quantity, frac, in.slices)
			if err != nil {
				return nil, nil, g, err
			}
			c.meas = append(c.meas, m)
		}
		c.cost, c.n = matchCost(c.meas, ins, minN)
	}
	allowed := func(c *candidate) bool {
		if fixRot != nil && angleDiff(c.pl.Rotation, *fixRot) > 1 {
			return false
		}
		if fixFace != nil && c.pl.Mirrored != *fixFace {
			return false
		}
		return true
	}
	order := make([]int, len(cands))
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(i, j int) bool { return cands[order[i]].cost < cands[order[j]].cost })
	win, second := -1, -1
	for _, i := range order {
		if !allowed(cands[i]) {
			continue
		}
		if win < 0 {
			win = i
		} else if second < 0 {
			second = i
		}
	}
	if win < 0 {
		// A fixed rotation that no symmetric placement has: the geometric
		// fit at that rotation is used as given.
		win = 0
	}
	given := fixRot != nil && fixFace != nil
	if second < 0 && given {
		for _, i := range order {
			if i != win {
				second = i
				break
			}
		}
	}
	w := cands[win]
	g.Chosen = Choice{Rotation: w.pl.Rotation, Mirrored: w.pl.Mirrored, Cost: w.cost}
	g.Vials = w.n
	g.Scale = noiseScale(w.meas, ins, minN, unc)
	if second >= 0 {
		s := cands[second]
		g.RunnerUp = &Choice{Rotation: s.pl.Rotation, Mirrored: s.pl.Mirrored, Cost: s.cost}
		m := s.cost - w.cost
		moved, terms := movedTerms(def, ins, w.pl, s.pl)
		z := 0.0
		if moved > 0 {
			// Each term that differs between the two placements moves the
			// margin by at most √2 σ of noise (ρ changes no faster than
			// |e|; two medians' noise), so noise alone gives the margin an
			// SD of at most σ·√(2·moved)/terms.
			z = m / (g.Scale * math.Sqrt(2*float64(moved)) / float64(terms))
		}
		g.Margin, g.Z, g.Moved = &m, &z, moved
	}
	g.Evidence = evidence(def, ins, w, cands, second, minN)
	switch {
	case given:
		g.Status = IdentityGiven
		g.Reason = "rotation and face given by the user"
	case second < 0:
		g.Reason = "the layout allows one placement only"
	case w.n < minIdentityVials:
		g.Status = IdentityUndetermined
		g.Reason = fmt.Sprintf("only %d vials measured with a reference: too few to tell the %d placements apart", w.n, len(cands))
	case *g.Z < IdentityThreshold:
		g.Status = IdentityUndetermined
		g.Reason = fmt.Sprintf("two placements match the references about equally (turned %.1f°%s and %.1f°%s; margin %.2f noise units, below %g)",
			w.pl.Rotation, faceText(w.pl.Mirrored), cands[second].pl.Rotation, faceText(cands[second].pl.Mirrored), *g.Z, IdentityThreshold)
	}
	pl := *w.pl
	pl.alts = nil
	return &pl, w.meas, g, nil
}

// movedTerms returns how many vial-quantity terms (with a reference) two
// placements measure in different places (vial centres more than half a
// radius apart), and the number of terms.
func movedTerms(def *Definition, ins []identityInput, a, b *Placement) (moved, terms int) {
	for _, in := range ins {
		for v, ref := range in.ref {
			if !(ref > 0) {
				continue
			}
			terms++
			vi := &def.Vials[v]
			if dist(a.vialCentre(vi), b.vialCentre(vi)) > 0.5*vi.Radius {
				moved++
			}
		}
	}
	return moved, terms
}

func faceText(m bool) string {
	if m {
		return " face down"
	}
	return " face up"
}

// matchCost returns the mean over vials and quantities with a reference
// of min(|ln(median/reference)|, MatchCap); a vial with a reference but
// without a usable measurement counts MatchCap. n is the number of vials
// measured in at least one map.
func matchCost(meas [][]VialQA, ins []identityInput, minN int) (cost float64, n int) {
	var s float64
	terms := 0
	measured := map[int]bool{}
	for k, in := range ins {
		for v, ref := range in.ref {
			if !(ref > 0) {
				continue
			}
			terms++
			r := meas[k][v]
			if r.N < minN || !(r.Median > 0) || math.IsInf(r.Median, 0) {
				s += MatchCap
				continue
			}
			measured[v] = true
			s += math.Min(math.Abs(math.Log(r.Median/ref)), MatchCap)
		}
	}
	if terms == 0 {
		// Nothing to compare: every placement matches alike (n = 0 makes
		// the identity undetermined when there is a choice).
		return 0, 0
	}
	return s / float64(terms), len(measured)
}

// noiseScale returns the spread of the log-ratios ln(median/reference) of
// a placement: per quantity the deviations from their median (a common
// bias of a quantity moves every candidate alike), pooled, as 1.4826 ×
// their median absolute value (the MAD's consistency factor for normal
// noise), floored at noiseFloor and at the largest reference uncertainty.
func noiseScale(meas [][]VialQA, ins []identityInput, minN int, unc float64) float64 {
	var dev []float64
	for k, in := range ins {
		var e []float64
		for v, ref := range in.ref {
			r := meas[k][v]
			if ref > 0 && r.N >= minN && r.Median > 0 && !math.IsInf(r.Median, 0) {
				e = append(e, math.Log(r.Median/ref))
			}
		}
		if len(e) == 0 {
			continue
		}
		m := median(e)
		for _, x := range e {
			dev = append(dev, math.Abs(x-m))
		}
	}
	s := noiseFloor
	if len(dev) > 0 {
		s = math.Max(s, 1.4826*median(dev))
	}
	return math.Max(s, unc/100)
}

func median(x []float64) float64 {
	y := append([]float64(nil), x...)
	sort.Float64s(y)
	n := len(y)
	if n%2 == 1 {
		return y[n/2]
	}
	return (y[n/2-1] + y[n/2]) / 2
}

// evidence lists, per vial and quantity with a reference, the median
// measured where the chosen placement and the runner-up put the vial.
func evidence(def *Definition, ins []identityInput, w *candidate, cands []*candidate, second, minN int) []Evidence {
	var out []Evidence
	val := func(r VialQA) *float64 {
		if r.N < minN || math.IsNaN(r.Median) || math.IsInf(r.Median, 0) {
			return nil
		}
		m := r.Median
		return &m
	}
	for k, in := range ins {
		for v, ref := range in.ref {
			if !(ref > 0) {
				continue
			}
			e := Evidence{ID: def.Vials[v].ID, Quantity: in.in.Quantity, Reference: ref, Chosen: val(w.meas[k][v])}
			if second >= 0 {
				e.RunnerUp = val(cands[second].meas[k][v])
			}
			out = append(out, e)
		}
	}
	return out
}

// twins returns, for each vial whose references at the session agree with
// another vial's within their combined uncertainty, √(u₁² + u₂²), in
// every quantity measured (at least one), the ids of those other vials:
// the values cannot tell them apart.
func twins(def *Definition, ins []identityInput) map[int][]string {
	out := map[int][]string{}
	for v := range def.Vials {
		for w := v + 1; w < len(def.Vials); w++ {
			common, close := 0, true
			for _, in := range ins {
				a, b := in.ref[v], in.ref[w]
				if !(a > 0) || !(b > 0) {
					continue
				}
				common++
				u := math.Max(math.Hypot(in.refUnc[v], in.refUnc[w])/100, 1e-9)
				if math.Abs(math.Log(a/b)) > u {
					close = false
				}
			}
			if common > 0 && close {
				out[v] = append(out[v], def.Vials[w].ID)
				out[w] = append(out[w], def.Vials[v].ID)
			}
		}
	}
	return out
}

// agree reports whether two placements put every vial in the same place
// (within half its radius, in the slice plane).
func agree(def *Definition, a, b *Placement) bool {
	for i := range def.Vials {
		v := &def.Vials[i]
		p, q := a.Point(v.X, v.Y), b.Point(v.X, v.Y)
		d := [3]float64{p[0] - q[0], p[1] - q[1], p[2] - q[2]}
		along := dot(d, a.N)
		if math.Sqrt(math.Max(0, dot(d, d)-along*along)) > 0.5*v.Radius {
			return false
		}
	}
	return true
}

// fixHint tells the user how to settle an undetermined identity.
const fixHint = "give the phantom's rotation and face (--rotation DEG --face up|down, as seen in the report's map), or use a definition whose layout or values have no symmetry"

func joinIDs(ids []string) string { return strings.Join(ids, ", ") }
