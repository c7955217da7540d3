package phantom

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"sort"

	"strings"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

// The identification tests build their own phantoms (rings of 6–14 vials,
// a ring with a centre vial, square grids, spheres and cylinders), place
// them at random (shift up to 30 mm, any rotation, face up or down) and
// paint T1 and T2 maps and a first-echo locator image with partial volume
// at every edge and noise of a chosen SNR. The maps are painted directly
// rather than fitted from series, so that 500 placements per layout stay
// affordable; the fit itself is covered by the phantom-ring10 test, which
// runs the whole chain on outside data.

// testLayout is a phantom layout built for the tests.
type testLayout struct {
	name   string
	def    *Definition
	slices int     // slices of the painted grid
	thick  float64 // slice thickness, mm
}

// ringDef returns n vials of radius r on a ring of radius R (the first at
// +y), plus a centre vial when centre; values from rng.
func ringDef(n int, R, r float64, centre bool, shape string, rng *rand.Rand) *Definition {
	var vs [][2]float64
	for i := 0; i < n; i++ {
		a := math.Pi/2 - 2*math.Pi*float64(i)/float64(n)
		vs = append(vs, [2]float64{R * math.Cos(a), R * math.Sin(a)})
	}
	if centre {
		vs = append(vs, [2]float64{0, 0})
	}
	return layoutDef(vs, r, shape, rng)
}

// gridDef returns a k×k square grid of spacing s.
func gridDef(k int, s, r float64, shape string, rng *rand.Rand) *Definition {
	var vs [][2]float64
	for j := 0; j < k; j++ {
		for i := 0; i < k; i++ {
			vs = append(vs, [2]float64{(float64(i) - float64(k-1)/2) * s, (float64(j) - float64(k-1)/2) * s})
		}
	}
	return layoutDef(vs, r, shape, rng)
}

// layoutDef gives vials at the positions references drawn at random: T1
// log-uniform in 150–2500 ms, T2 a fraction 0.08–0.25 of T1 (a span like
// that of doped-gel phantoms; tauvox's choice), 1.5 % uncertainty, at 1.5 T
// and 20 °C.
func layoutDef(pos [][2]float64, r float64, shape string, rng *rand.Rand) *Definition {
	d := &Definition{Format: FormatV1, Name: "test layout", Tolerance: map[string]Tolerance{"T1": {Pct: 5, Abs: 5}, "T2": {Pct: 8, Abs: 2}},
		Body: &Body{Radius: 100, Length: 60, FillT1: 1200, FillT2: 300, FillPD: 1}}
	for i, p := range pos {
		t1 := 150 * math.Exp(rng.Float64()*math.Log(2500.0/150))
		t2 := t1 * (0.08 + 0.17*rng.Float64())
		d.Vials = append(d.Vials, Vial{ID: fmt.Sprintf("V%02d", i+1), X: p[0], Y: p[1], Radius: r, Shape: shape, PD: 0.85 + 0.1*rng.Float64(),
			Reference: map[string][]Row{
				"T1": {{Field: 1.5, Temperature: 20, Value: t1, Uncertainty: 1.5}},
				"T2": {{Field: 1.5, Temperature: 20, Value: t2, Uncertainty: 1.5}}}})
	}
	return d
}

// mapScene is one random placement of a layout.
type mapScene struct {
	lay    *testLayout
	cx, cy float64 // centre, RAS mm
	rot    float64 // degrees
	mirror bool
	plane  float64 // z of the phantom's centre plane, mm
	snr    float64
	seed   uint64
	spoil  map[int]float64 // true T1 and T2 of these vials multiplied by the factor
}

const (
	testMatrix = 112
	testVoxel  = 2.5
)

// paint returns the T1 map, T2 map and locator image of the scene. Each
// voxel is sub-sampled 4 × 4 in-plane and, with spheres, 3 × through the
// slice; a map
// voxel holds the geometric mean of its sub-samples' values weighted by
// their share (air sub-samples out; NaN when air is the larger share, as
// a fit's mask leaves it). Map noise is Gaussian with a relative SD of
// 2/SNR (roughly what a multi-echo or multi-TI fit gives at that image
// SNR; tauvox's test assumption), locator noise Rician with σ = 1000/SNR.
func (m *mapScene) paint() (t1, t2, loc *volume.Image) {
	d := m.lay.def
	n := testMatrix
	a := volume.Identity()
	a[0][0], a[1][1], a[2][2] = -testVoxel, testVoxel, m.lay.thick
	a[0][3] = testVoxel * float64(n-1) / 2
	a[1][3] = -testVoxel * float64(n-1) / 2
	a[2][3] = -m.lay.thick * float64(m.lay.slices-1) / 2
	mk := func() *volume.Image {
		im := volume.New(n, n, m.lay.slices, 1)
		im.Affine = a
		return im
	}
	t1, t2, loc = mk(), mk(), mk()
	rng := rand.New(rand.NewPCG(m.seed, 77))
	th := -m.rot * math.Pi / 180
	cs, sn := math.Cos(th), math.Sin(th)
	type mat struct{ t1, t2, pd float64 }
	mats := make([]mat, len(d.Vials))
	for i := range d.Vials {
		v := &d.Vials[i]
		mats[i] = mat{v.Reference["T1"][0].Value, v.Reference["T2"][0].Value, v.PD}
		if f, ok := m.spoil[i]; ok {
			mats[i].t1 *= f
			mats[i].t2 *= f
		}
	}
	fill := mat{d.Body.FillT1, d.Body.FillT2, d.Body.FillPD}
	// Through-slice sub-samples matter only for spheres.
	const sxy = 4
	sz := 1
	if sph, _ := d.hasSpheres(); sph {
		sz = 3
	}
	for k := 0; k < m.lay.slices; k++ {
		for j := 0; j < n; j++ {
			for i := 0; i < n; i++ {
				var w, l1, l2, s float64
				cnt := 0
				for si := 0; si < sxy; si++ {
					for sj := 0; sj < sxy; sj++ {
						for sk := 0; sk < sz; sk++ {
							x, y, z := a.Apply(float64(i)+(float64(si)+0.5)/sxy-0.5, float64(j)+(float64(sj)+0.5)/sxy-0.5, float64(k)+(float64(sk)+0.5)/float64(sz)-0.5)
							dx, dy := x-m.cx, y-m.cy
							px, py, pz := dx*cs-dy*sn, dx*sn+dy*cs, z-m.plane
							if m.mirror {
								px, pz = -px, -pz
							}
							cnt++
							if px*px+py*py > d.Body.Radius*d.Body.Radius || math.Abs(pz) > d.Body.Length/2 {
								continue
							}
							mt := fill
							for vi := range d.Vials {
								v := &d.Vials[vi]
								rr := (px-v.X)*(px-v.X) + (py-v.Y)*(py-v.Y)
								if v.IsSphere() {
									rr += (pz - v.Z) * (pz - v.Z)
								}
								if rr <= v.Radius*v.Radius {
									mt = mats[vi]
									break
								}
							}
							w++
							l1 += math.Log(mt.t1)
							l2 += math.Log(mt.t2)
							s += mt.pd * math.Exp(-10/mt.t2)
						}
					}
				}
				idx := i + n*(j+n*k)
				sig := 1000 * s / float64(cnt)
				loc.Data[idx] = float32(fit.Rician(rng, sig, 1000/m.snr))
				if w < float64(cnt)/2 {
					t1.Data[idx], t2.Data[idx] = float32(math.NaN()), float32(math.NaN())
					continue
				}
				t1.Data[idx] = float32(math.Exp(l1/w) * (1 + 2/m.snr*rng.NormFloat64()))
				t2.Data[idx] = float32(math.Exp(l2/w) * (1 + 2/m.snr*rng.NormFloat64()))
			}
		}
	}
	return t1, t2, loc
}

// planeTol is the largest error (mm) allowed in the spheres' plane found
// from the images: a third of the 4 mm slice (tauvox's limit: the cut
// radius, and so the region, changes by under 4 % of the sphere radius).
const planeTol = 4.0 / 3

// planeErr collects the plane errors of the sphere layouts.
var planeErr []float64

// outcome of one identification.
type outcome struct {
	status  string  // IdentityFound…, or "wrong" for a found identity that is wrong
	correct bool    // the chosen placement (found or not) is the true one
	z       float64 // margin in noise units (NaN without runner-up)
	res     *Result
}

// identifyScene runs Assess on the painted scene and checks every vial's
// placed centre against the truth (within half its radius in the plane).
func identifyScene(t *testing.T, m *mapScene, both bool) outcome {
	t.Helper()
	t1, t2, loc := m.paint()
	ins := []Input{{Quantity: "T2", Map: t2, Locator: loc}}
	if both {
		ins = append(ins, Input{Quantity: "T1", Map: t1, Locator: loc})
	}
	res, err := Assess(m.lay.def, ins, &Options{Session: Session{Field: 1.5, Temperature: 20}})
	if err != nil {
		t.Fatalf("%s: %v", m.lay.name, err)
	}
	id := res.QA.Identity
	o := outcome{status: id.Status, z: math.NaN(), res: res}
	if z := id.Groups[0].Z; z != nil {
		o.z = *z
	}
	pl := res.Placements[0]
	if sph, _ := m.lay.def.hasSpheres(); sph && m.lay.slices > 1 {
		// The spheres' plane found from the images (their z is 0 here).
		if e := pl.Center[2] - m.plane; math.Abs(e) > planeTol {
			t.Errorf("%s: sphere plane found at z %.2f mm, true %.2f mm", m.lay.name, pl.Center[2], m.plane)
		}
		planeErr = append(planeErr, pl.Center[2]-m.plane)
	}
	th := m.rot * math.Pi / 180
	for i := range m.lay.def.Vials {
		v := &m.lay.def.Vials[i]
		px := v.X
		if m.mirror {
			px = -px
		}
		tx, ty := m.cx+px*math.Cos(th)-v.Y*math.Sin(th), m.cy+px*math.Sin(th)+v.Y*math.Cos(th)
		p := pl.Point(v.X, v.Y)
		if math.Hypot(p[0]-tx, p[1]-ty) > 0.5*v.Radius {
			if o.status != IdentityUndetermined {
				o.status = "wrong"
			}
			return o
		}
	}
	o.correct = true
	return o
}

// randomScene draws a placement: centre uniform in a 30 mm disc, any
// rotation, either face, SNR 30–100, and for spheres the centre plane
// anywhere within ±half a slice of the slab's middle.
func randomScene(lay *testLayout, rng *rand.Rand, seed uint64) *mapScene {
	r := 30 * math.Sqrt(rng.Float64())
	a := 2 * math.Pi * rng.Float64()
	m := &mapScene{lay: lay, cx: r * math.Cos(a), cy: r * math.Sin(a), rot: 360 * rng.Float64(), mirror: rng.IntN(2) == 1,
		snr: 30 + 70*rng.Float64(), seed: seed}
	if lay.slices > 1 {
		m.plane = (rng.Float64() - 0.5) * lay.thick
	}
	return m
}

func testLayouts() []*testLayout {
	rng := rand.New(rand.NewPCG(2026, 13))
	return []*testLayout{
		{"ring of 6 cylinders", ringDef(6, 50, 11, false, "", rng), 1, 5},
		{"ring of 8 cylinders", ringDef(8, 55, 10, false, "", rng), 1, 5},
		{"ring of 10 cylinders", ringDef(10, 55, 9, false, "", rng), 1, 5},
		{"ring of 12 cylinders", ringDef(12, 65, 9, false, "", rng), 1, 5},
		{"ring of 14 cylinders", ringDef(14, 70, 8, false, "", rng), 1, 5},
		{"ring of 8 cylinders and a centre vial", ringDef(8, 55, 10, true, "", rng), 1, 5},
		{"3×3 grid of cylinders", gridDef(3, 40, 10, "", rng), 1, 5},
		{"4×4 grid of cylinders", gridDef(4, 35, 9, "", rng), 1, 5},
		{"ring of 10 spheres", ringDef(10, 55, 9, false, ShapeSphere, rng), 3, 4},
		{"ring of 6 spheres and a centre sphere", ringDef(6, 50, 10, true, ShapeSphere, rng), 3, 4},
		{"3×3 grid of spheres", gridDef(3, 40, 10, ShapeSphere, rng), 3, 4},
	}
}

// placementsPerLayout is 500 with TAUVOX_IDENTIFY_FULL=1 (the issue's
// acceptance run; about 10 minutes), else a smaller always-run sample
// (fewer under -short or the race detector).
func placementsPerLayout() int {
	if os.Getenv("TAUVOX_IDENTIFY_FULL") != "" {
		return 500
	}
	if testing.Short() || raceEnabled {
		return 2
	}
	return 6
}

// TestIdentifyLayouts: every layout is identified in at least 99 % of its
// random placements, and no placement comes out with a wrong identity (a
// wrong one must be undetermined). The margins of the correct identities
// are logged for docs/validation.md.
func TestIdentifyLayouts(t *testing.T) {
	n := placementsPerLayout()
	var allZ []float64
	for li, lay := range testLayouts() {
		rng := rand.New(rand.NewPCG(uint64(li), 99))
		var ok, und, wrong int
		var zs []float64
		for p := 0; p < n; p++ {
			m := randomScene(lay, rng, uint64(1000*li+p))
			o := identifyScene(t, m, p%2 == 0)
			switch o.status {
			case IdentityFound:
				ok++
				zs = append(zs, o.z)
			case IdentityUndetermined:
				und++
				t.Logf("%s placement %d: undetermined (%s)", lay.name, p, o.res.QA.Identity.Reason)
			default:
				wrong++
				t.Errorf("%s placement %d (%+v): wrong identity reported as %s", lay.name, p, *m, o.res.QA.Identity.Groups[0].Status)
			}
		}
		sort.Float64s(zs)
		allZ = append(allZ, zs...)
		rate := float64(ok) / float64(n)
		t.Logf("%-40s %d placements: %d identified (%.1f %%), %d undetermined, %d wrong; margin z min %.1f median %.1f",
			lay.name, n, ok, 100*rate, und, wrong, first(zs), median(zs))
		if rate < 0.99 && n >= 100 || n < 100 && und > 0 {
			t.Errorf("%s: identified in %.1f %% of placements", lay.name, 100*rate)
		}
	}
	if len(planeErr) > 0 {
		worst := 0.0
		for _, e := range planeErr {
			worst = math.Max(worst, math.Abs(e))
		}
		t.Logf("sphere plane from the images: %d placements, worst error %.2f mm", len(planeErr), worst)
	}
	sort.Float64s(allZ)
	t.Logf("all correct identities: margin z min %.1f, 1st percentile %.1f, median %.1f (threshold %g)",
		first(allZ), allZ[len(allZ)/100], median(allZ), IdentityThreshold)
}

func first(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	return x[0]
}

// periodicDef is a ring of n vials whose values repeat with period p: the
// turn by p places matches exactly as well as the true one.
func periodicDef(n, p int, rng *rand.Rand) *Definition {
	d := ringDef(n, 55, 10, false, "", rng)
	for i := p; i < n; i++ {
		d.Vials[i].Reference = d.Vials[i%p].Reference
	}
	return d
}

// TestIdentifyAmbiguous: layouts whose values repeat under a turn or a
// mirror cannot be identified: every placement must come out
// undetermined, with every vial undetermined, never a guess. Their
// margins are logged beside those of correct identities (docs/methods.md).
func TestIdentifyAmbiguous(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	mirrorDef := ringDef(6, 50, 11, false, "", rng)
	// Mirror pairs about the y axis share values: 0|1↔5|2↔4|3.
	mirrorDef.Vials[5].Reference = mirrorDef.Vials[1].Reference
	mirrorDef.Vials[4].Reference = mirrorDef.Vials[2].Reference
	lays := []*testLayout{
		{"ring of 8, values repeating every 4", periodicDef(8, 4, rng), 1, 5},
		{"ring of 12, values repeating every 6", periodicDef(12, 6, rng), 1, 5},
		{"ring of 6, values mirror-symmetric", mirrorDef, 1, 5},
		{"ring of 6, all values equal", periodicDef(6, 1, rng), 1, 5},
	}
	n := max(placementsPerLayout()/2, 2)
	var zs []float64
	for li, lay := range lays {
		prng := rand.New(rand.NewPCG(uint64(li), 5))
		for p := 0; p < n; p++ {
			m := randomScene(lay, prng, uint64(77*li+p))
			o := identifyScene(t, m, p%2 == 0)
			zs = append(zs, o.z)
			if o.status != IdentityUndetermined {
				t.Errorf("%s placement %d: identity %s (z %.2f), want undetermined", lay.name, p, o.status, o.z)
				continue
			}
			for _, v := range o.res.QA.Vials {
				if v.Verdict != Undetermined && v.Verdict != NotMeasured {
					t.Errorf("%s: vial %s %s verdict %s under an undetermined identity", lay.name, v.ID, v.Quantity, v.Verdict)
				}
			}
			if o.res.QA.Verdict != Undetermined || o.res.QA.Identity.Fix == "" || o.res.QA.Identity.Reason == "" {
				t.Errorf("%s: session verdict %s, reason %q, fix %q", lay.name, o.res.QA.Verdict, o.res.QA.Identity.Reason, o.res.QA.Identity.Fix)
			}
		}
	}
	sort.Float64s(zs)
	t.Logf("ambiguous layouts, %d placements: margin z max %.2f, median %.2f (threshold %g)", len(zs), zs[len(zs)-1], median(zs), IdentityThreshold)
}

// TestIdentifyNearAmbiguous: rings whose values repeat under a turn to
// within 0.5–4 % (each vial perturbed at random by that much): the values
// can only just tell the placements apart, so the outcome may be either
// correct or undetermined, never a wrong identity. The margins of the
// placements chosen wrongly (all of which must be undetermined) and of the
// correct ones are logged for the threshold's choice (docs/methods.md).
func TestIdentifyNearAmbiguous(t *testing.T) {
	n := max(placementsPerLayout(), 3)
	var wrongZ, rightZ []float64
	und := 0
	for di, delta := range []float64{0.005, 0.01, 0.02, 0.04} {
		rng := rand.New(rand.NewPCG(uint64(di), 31))
		d := periodicDef(8, 4, rng)
		for i := 4; i < 8; i++ {
			ref := map[string][]Row{}
			for q, rows := range d.Vials[i].Reference {
				r := rows[0]
				sign := float64(1 - 2*rng.IntN(2))
				r.Value *= 1 + sign*delta
				ref[q] = []Row{r}
			}
			d.Vials[i].Reference = ref
		}
		lay := &testLayout{fmt.Sprintf("ring of 8, values repeating to within %g %%", 100*delta), d, 1, 5}
		for p := 0; p < n; p++ {
			m := randomScene(lay, rng, uint64(500*di+p))
			o := identifyScene(t, m, p%2 == 0)
			if o.status == "wrong" {
				t.Errorf("%s placement %d: wrong identity found (z %.2f)", lay.name, p, o.z)
			}
			if o.status == IdentityUndetermined {
				und++
			}
			if o.correct {
				rightZ = append(rightZ, o.z)
			} else {
				wrongZ = append(wrongZ, o.z)
			}
		}
	}
	sort.Float64s(wrongZ)
	sort.Float64s(rightZ)
	last := func(x []float64) float64 {
		if len(x) == 0 {
			return math.NaN()
		}
		return x[len(x)-1]
	}
	t.Logf("near-ambiguous rings, %d placements: %d undetermined; chosen wrongly %d times (margin z max %.2f); chosen rightly %d times (margin z median %.2f, max %.2f)",
		len(wrongZ)+len(rightZ), und, len(wrongZ), last(wrongZ), len(rightZ), median(append([]float64{0}, rightZ...)), last(rightZ))
}

// TestIdentifyTwins: a ring whose vials differ except two of identical
// values: the session is identified, those two vials are reported
// ambiguous (undetermined, naming each other) and the others judged.
func TestIdentifyTwins(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 3))
	d := ringDef(8, 55, 10, false, "", rng)
	d.Vials[6].Reference = d.Vials[2].Reference
	lay := &testLayout{"ring of 8 with twins", d, 1, 5}
	for p := 0; p < 4; p++ {
		m := randomScene(lay, rng, uint64(p))
		o := identifyScene(t, m, true)
		if o.status != IdentityFound {
			t.Fatalf("placement %d: identity %s (%s)", p, o.status, o.res.QA.Identity.Reason)
		}
		for _, v := range o.res.QA.Vials {
			twin := v.ID == "V03" || v.ID == "V07"
			switch {
			case twin && (v.Verdict != Undetermined || !strings.Contains(v.Note, map[bool]string{true: "V07", false: "V03"}[v.ID == "V03"])):
				t.Errorf("twin %s %s: verdict %s note %q", v.ID, v.Quantity, v.Verdict, v.Note)
			case !twin && v.Verdict != Pass:
				t.Errorf("vial %s %s: verdict %s (%s), want pass", v.ID, v.Quantity, v.Verdict, v.Note)
			}
		}
		if o.res.QA.Verdict != Undetermined {
			t.Errorf("session verdict %s with two undetermined vials", o.res.QA.Verdict)
		}
	}
}

// TestIdentifyGiven: a rotation and face given by the user are used as
// given, even on an ambiguous layout, and reported as given.
func TestIdentifyGiven(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	lay := &testLayout{"periodic ring", periodicDef(8, 4, rng), 1, 5}
	m := &mapScene{lay: lay, cx: 12, cy: -7, rot: 100, mirror: true, snr: 60, seed: 1}
	t1, t2, loc := m.paint()
	rot, face := 100.0, true
	res, err := Assess(lay.def, []Input{{Quantity: "T1", Map: t1, Locator: loc}, {Quantity: "T2", Map: t2, Locator: loc}},
		&Options{Session: Session{Field: 1.5, Temperature: 20}, Locate: LocateOptions{Rotation: &rot, Mirrored: &face}})
	if err != nil {
		t.Fatal(err)
	}
	id := res.QA.Identity
	pl := res.Placements[0]
	if id.Status != IdentityGiven || angleDiff(pl.Rotation, 100) > 0.01 || !pl.Mirrored || res.QA.Verdict != Pass {
		t.Errorf("identity %s (%s), placement %.2f° mirrored %v, verdict %s", id.Status, id.Reason, pl.Rotation, pl.Mirrored, res.QA.Verdict)
	}
	// The face alone settles nothing on this layout (turns by 4 places
	// remain); the turn alone settles it.
	res, err = Assess(lay.def, []Input{{Quantity: "T2", Map: t2, Locator: loc}},
		&Options{Session: Session{Field: 1.5, Temperature: 20}, Locate: LocateOptions{Rotation: &rot}})
	if err != nil {
		t.Fatal(err)
	}
	if s := res.QA.Identity.Status; s != IdentityFound || !res.Placements[0].Mirrored {
		t.Errorf("rotation given: identity %s (%s), mirrored %v", s, res.QA.Identity.Reason, res.Placements[0].Mirrored)
	}
}

// TestSymmetries: the number of placements each layout allows.
func TestSymmetries(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	cases := []struct {
		def  *Definition
		want int
	}{
		{ringDef(6, 50, 10, false, "", rng), 12},
		{ringDef(10, 55, 9, false, "", rng), 20},
		{ringDef(14, 70, 8, false, "", rng), 28},
		{ringDef(8, 55, 10, true, "", rng), 16},
		{gridDef(3, 40, 10, "", rng), 8},
		{gridDef(4, 35, 9, "", rng), 8},
		{Demo(), 1},
	}
	for i, c := range cases {
		s := c.def.Symmetries()
		if len(s) != c.want {
			t.Errorf("case %d: %d symmetries, want %d", i, len(s), c.want)
		}
		for _, sy := range s {
			seen := map[int]bool{}
			for _, p := range sy.Perm {
				seen[p] = true
			}
			if len(seen) != len(c.def.Vials) {
				t.Errorf("case %d: symmetry %+v is not a permutation", i, sy)
			}
		}
	}
	// A ring with one vial moved off by 5 mm keeps only the mirror through
	// that vial.
	d := ringDef(8, 55, 10, false, "", rng)
	d.Vials[0].Y += 5
	if s := d.Symmetries(); len(s) != 2 {
		t.Errorf("broken ring: %d symmetries, want 2", len(s))
	}
}

// TestIdentifyGrids: T1 and T2 maps on different grids are identified
// each on its own; when they agree the session is identified, when the
// phantom was turned between the two series the session is undetermined.
func TestIdentifyGrids(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 9))
	lay1 := &testLayout{"ring of 10, one slice", ringDef(10, 55, 9, false, "", rng), 1, 5}
	lay3 := &testLayout{"ring of 10, three slices", lay1.def, 3, 5}
	a := &mapScene{lay: lay1, cx: 8, cy: -12, rot: 233, mirror: true, snr: 50, seed: 1}
	b := *a
	b.lay, b.seed = lay3, 2
	_, t2, loc2 := a.paint()
	t1, _, loc1 := b.paint()
	opt := &Options{Session: Session{Field: 1.5, Temperature: 20}}
	res, err := Assess(lay1.def, []Input{{Quantity: "T2", Map: t2, Locator: loc2}, {Quantity: "T1", Map: t1, Locator: loc1}}, opt)
	if err != nil {
		t.Fatal(err)
	}
	if id := res.QA.Identity; id.Status != IdentityFound || len(id.Groups) != 2 || res.QA.Verdict != Pass {
		t.Errorf("agreeing grids: identity %s (%s), %d groups, verdict %s", id.Status, id.Reason, len(id.Groups), res.QA.Verdict)
	}
	// The phantom turned by one vial place between the series.
	b.rot += 36
	t1, _, loc1 = b.paint()
	res, err = Assess(lay1.def, []Input{{Quantity: "T2", Map: t2, Locator: loc2}, {Quantity: "T1", Map: t1, Locator: loc1}}, opt)
	if err != nil {
		t.Fatal(err)
	}
	if id := res.QA.Identity; id.Status != IdentityUndetermined || !strings.Contains(id.Reason, "different grids") || res.QA.Verdict != Undetermined {
		t.Errorf("disagreeing grids: identity %s (%s), verdict %s", id.Status, id.Reason, res.QA.Verdict)
	}
}

// TestIdentifyBadVials: a ring of 10 with two vials far off their
// references (×1.6 and ×0.5: a spoilt fill) is still identified, since the
// match measure caps each vial's mismatch; those two vials fail.
func TestIdentifyBadVials(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 4))
	lay := &testLayout{"ring of 10 with two spoilt vials", ringDef(10, 55, 9, false, "", rng), 1, 5}
	for p := 0; p < 4; p++ {
		m := randomScene(lay, rng, uint64(p))
		m.spoil = map[int]float64{2: 1.6, 7: 0.5}
		o := identifyScene(t, m, true)
		if o.status != IdentityFound {
			t.Fatalf("placement %d: identity %s (%s)", p, o.status, o.res.QA.Identity.Reason)
		}
		for _, v := range o.res.QA.Vials {
			want := Pass
			if v.ID == "V03" || v.ID == "V08" {
				want = Fail
			}
			if v.Verdict != want {
				t.Errorf("placement %d: %s %s verdict %s, want %s", p, v.ID, v.Quantity, v.Verdict, want)
			}
		}
		t.Logf("placement %d: margin z %.1f", p, o.z)
	}
}

// TestSphereNotInSlab: a ring of 10 spheres of which one lies 30 mm above
// the others, outside the imaged slab: that sphere is not measured (noted
// not in the imaged slab, not a failure), the others are identified and
// pass. The images cannot tell the ring's 20 placements apart (the missing
// sphere is just not seen), so all 20 are candidates.
func TestSphereNotInSlab(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	d := ringDef(10, 55, 9, false, ShapeSphere, rng)
	d.Body.Length = 100
	d.Vials[0].Z = 30
	if n := len(d.Symmetries()); n != 20 {
		t.Errorf("%d symmetries, want 20", n)
	}
	lay := &testLayout{"ring of 10 spheres, one out of the slab", d, 3, 4}
	for p := 0; p < 4; p++ {
		m := randomScene(lay, rng, uint64(p))
		o := identifyScene(t, m, true)
		if o.status != IdentityFound {
			t.Fatalf("placement %d (%+v): identity %s (%s)", p, *m, o.status, o.res.QA.Identity.Reason)
		}
		for _, v := range o.res.QA.Vials {
			switch {
			case v.ID == "V01" && (v.Verdict != NotMeasured || v.Note != NotInSlab):
				t.Errorf("V01 %s: verdict %s note %q", v.Quantity, v.Verdict, v.Note)
			case v.ID != "V01" && v.Verdict != Pass:
				t.Errorf("%s %s: verdict %s (%s)", v.ID, v.Quantity, v.Verdict, v.Note)
			}
		}
		if o.res.QA.Verdict != Pass {
			t.Errorf("session verdict %s", o.res.QA.Verdict)
		}
	}
}

// TestIdentifyTooFewVials: when fewer than three vials can be measured the
// values cannot decide between a ring's placements: undetermined, with the
// reason.
func TestIdentifyTooFewVials(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 2))
	lay := &testLayout{"ring of 8", ringDef(8, 55, 10, false, "", rng), 1, 5}
	m := &mapScene{lay: lay, cx: 5, cy: 5, rot: 20, snr: 60, seed: 3}
	t1, t2, loc := m.paint()
	// Only two vials keep fitted values.
	pl, err := Locate(loc, lay.def, nil)
	if err != nil {
		t.Fatal(err)
	}
	keep := map[int]bool{}
	for _, v := range []int{0, 1} {
		idx := VialRegion(t2, pl.Point(lay.def.Vials[v].X, lay.def.Vials[v].Y), pl.N, 12, []int{0})
		for _, i := range idx {
			keep[i] = true
		}
	}
	for i := range t2.Data {
		if !keep[i] {
			t1.Data[i], t2.Data[i] = float32(math.NaN()), float32(math.NaN())
		}
	}
	res, err := Assess(lay.def, []Input{{Quantity: "T1", Map: t1, Locator: loc}, {Quantity: "T2", Map: t2, Locator: loc}},
		&Options{Session: Session{Field: 1.5, Temperature: 20}})
	if err != nil {
		t.Fatal(err)
	}
	id := res.QA.Identity
	if id.Status != IdentityUndetermined || !strings.Contains(id.Reason, "only 2 vials measured") || res.QA.Verdict != Undetermined {
		t.Errorf("identity %s (%s), verdict %s", id.Status, id.Reason, res.QA.Verdict)
	}
}

// TestSpherePlaneOffCentre: spheres whose plane lies two to three slices
// from the middle of a 7-slice slab: the slice that shows them is found,
// the plane located, and the ring identified.
func TestSpherePlaneOffCentre(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	d := ringDef(10, 55, 9, false, ShapeSphere, rng)
	lay := &testLayout{"ring of 10 spheres, plane off the slab's middle", d, 7, 4}
	for p := 0; p < 6; p++ {
		m := randomScene(lay, rng, uint64(p))
		m.plane = float64(1-2*(p%2)) * (8 + 4*rng.Float64())
		o := identifyScene(t, m, true)
		if o.status != IdentityFound {
			t.Errorf("placement %d (plane %.1f mm): identity %s (%s)", p, m.plane, o.status, o.res.QA.Identity.Reason)
			continue
		}
		for _, v := range o.res.QA.Vials {
			if v.Verdict != Pass {
				t.Errorf("placement %d: %s %s verdict %s (%s)", p, v.ID, v.Quantity, v.Verdict, v.Note)
			}
		}
	}
}
