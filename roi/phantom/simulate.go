package phantom

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

// Scene places a phantom in a synthetic scanner and sets the imaging
// conditions of a simulated session. The zero value of every field but Def
// selects its default.
type Scene struct {
	Def         *Definition
	Field       float64    // tesla; default 1.5
	Temperature float64    // °C; default 20
	Center      [3]float64 // phantom centre in scanner RAS mm; default the origin
	Rotation    float64    // in-plane rotation, degrees counter-clockwise
	Mirror      bool       // phantom lies face down (x mirrored)
	Matrix      int        // in-plane matrix; default 96
	Voxel       float64    // in-plane voxel size, mm; default 2.5
	Slices      int        // default 3
	Thickness   float64    // slice step, mm; default 5
	Scale       float64    // signal of PD = 1 fully relaxed; default 1000
	Sigma       float64    // Rician noise SD (same units as Scale); default 10, negative for none
	B1          float64    // transmit field scale; default 1
	Efficiency  float64    // inversion efficiency κ; default 1
	Seed        uint64     // noise seed
	// Shift multiplies a vial's true T1 and T2 (by vial id), to simulate a
	// drifting material.
	Shift map[string]float64
	// R2prime is the extra dephasing rate for T2*, 1/s; default 15.
	R2prime float64
	// Tilt turns the slice grid about the scanner x axis by this many
	// degrees (an oblique acquisition); the phantom stays upright.
	Tilt float64
}

func (s *Scene) defaults() Scene {
	c := *s
	if c.Field == 0 {
		c.Field = 1.5
	}
	if c.Temperature == 0 {
		c.Temperature = 20
	}
	if c.Matrix == 0 {
		c.Matrix = 96
	}
	if c.Voxel == 0 {
		c.Voxel = 2.5
	}
	if c.Slices == 0 {
		c.Slices = 3
	}
	if c.Thickness == 0 {
		c.Thickness = 5
	}
	if c.Scale == 0 {
		c.Scale = 1000
	}
	if c.Sigma == 0 {
		c.Sigma = 10
	}
	if c.B1 == 0 {
		c.B1 = 1
	}
	if c.Efficiency == 0 {
		c.Efficiency = 1
	}
	if c.R2prime == 0 {
		c.R2prime = 15
	}
	return c
}

// Affine returns the voxel-to-world affine of the scene's grid: axial
// slices centred on the scanner origin, i running towards the patient's
// left (−x in RAS, as in a radiological display), j towards anterior (+y),
// k towards superior (+z).
func (s *Scene) Affine() volume.Affine {
	c := s.defaults()
	n := float64(c.Matrix)
	a := volume.Identity()
	a[0][0] = -c.Voxel
	a[1][1] = c.Voxel
	a[2][2] = c.Thickness
	a[0][3] = c.Voxel * (n - 1) / 2
	a[1][3] = -c.Voxel * (n - 1) / 2
	a[2][3] = -c.Thickness * float64(c.Slices-1) / 2
	if c.Tilt != 0 {
		th := c.Tilt * math.Pi / 180
		r := volume.Affine{{1, 0, 0, 0}, {0, math.Cos(th), -math.Sin(th), 0}, {0, math.Sin(th), math.Cos(th), 0}, {0, 0, 0, 1}}
		a = r.Mul(&a)
	}
	return a
}

// ToPhantom maps a scanner position (RAS mm) to the phantom's own plane.
func (s *Scene) ToPhantom(x, y float64) (px, py float64) {
	c := s.defaults()
	dx, dy := x-c.Center[0], y-c.Center[1]
	th := -c.Rotation * math.Pi / 180
	px = dx*math.Cos(th) - dy*math.Sin(th)
	py = dx*math.Sin(th) + dy*math.Cos(th)
	if c.Mirror {
		px = -px
	}
	return px, py
}

// axial returns the phantom-frame height of scanner z (turned over when the
// phantom lies face down). The scene's phantom axis is the scanner's z.
func (s *Scene) axial(z float64) float64 {
	if s.Mirror {
		return s.Center[2] - z
	}
	return z - s.Center[2]
}

// FromPhantom maps a point of the phantom's plane to scanner RAS (x, y).
func (s *Scene) FromPhantom(px, py float64) (x, y float64) {
	c := s.defaults()
	if c.Mirror {
		px = -px
	}
	th := c.Rotation * math.Pi / 180
	return c.Center[0] + px*math.Cos(th) - py*math.Sin(th), c.Center[1] + px*math.Sin(th) + py*math.Cos(th)
}

// Material returns the simulated tissue of vial v (nil for the fill) at the
// scene's field and temperature.
func (s *Scene) Material(v *Vial) (fit.Tissue, error) {
	c := s.defaults()
	if v == nil {
		b := c.Def.Body
		if b == nil {
			return fit.Tissue{}, nil
		}
		return fit.Tissue{PD: b.FillPD, T1: b.FillT1, T2: b.FillT2, T2star: 1 / (1/b.FillT2 + c.R2prime/1000)}, nil
	}
	t1, _, ok1, err := v.ReferenceAt("T1", c.Field, c.Temperature, true)
	if err != nil {
		return fit.Tissue{}, err
	}
	t2, _, ok2, err := v.ReferenceAt("T2", c.Field, c.Temperature, true)
	if err != nil {
		return fit.Tissue{}, err
	}
	if !ok1 || !ok2 {
		return fit.Tissue{}, fmt.Errorf("vial %s has no T1 and T2 reference at %g T", v.ID, c.Field)
	}
	if f, ok := c.Shift[v.ID]; ok && f > 0 {
		t1 *= f
		t2 *= f
	}
	pd := v.PD
	if pd == 0 {
		pd = 1
	}
	return fit.Tissue{PD: pd, T1: t1, T2: t2, T2star: 1 / (1/t2 + c.R2prime/1000)}, nil
}

// sub is the in-plane supersampling per voxel side for partial volume.
const sub = 3

// region returns the vial index (≥ 0), −1 for fill or −2 for air at a
// point of the phantom's frame (pz along its axis, for spheres).
func (s *Scene) region(px, py, pz float64) int {
	for i := range s.Def.Vials {
		v := &s.Def.Vials[i]
		d2 := (px-v.X)*(px-v.X) + (py-v.Y)*(py-v.Y)
		if v.IsSphere() {
			d2 += (pz - v.Z) * (pz - v.Z)
		}
		if d2 <= v.Radius*v.Radius {
			return i
		}
	}
	if b := s.Def.Body; b != nil && px*px+py*py <= b.Radius*b.Radius {
		return -1
	}
	return -2
}

// Series simulates a series of the scene with sequence seq; acq gives each
// volume's parameters (TE, TI, TR in ms, flip angle in degrees).
func (s *Scene) Series(seq fit.Sequence, acq []volume.Acquisition) (*volume.Image, error) {
	if s.Def == nil {
		return nil, errors.New("phantom: scene has no definition")
	}
	if len(acq) == 0 {
		return nil, errors.New("phantom: empty protocol")
	}
	c := s.defaults()
	mats := make([]fit.Tissue, len(c.Def.Vials))
	for i := range mats {
		var err error
		if mats[i], err = c.Material(&c.Def.Vials[i]); err != nil {
			return nil, err
		}
	}
	fill, _ := c.Material(nil)
	// Signal of each region per volume.
	nt := len(acq)
	sig := make([][]float64, len(mats)+2) // index region+2
	for r := range sig {
		sig[r] = make([]float64, nt)
		var x fit.Tissue
		switch {
		case r == 0:
			continue // air
		case r == 1:
			x = fill
		default:
			x = mats[r-2]
		}
		for t, a := range acq {
			sig[r][t] = c.Scale * fit.Signal(seq, x, a.EchoTime, a.InversionTime, a.RepetitionTime, a.FlipAngle*c.B1, c.Efficiency)
		}
	}
	n := c.Matrix
	im := volume.New(n, n, c.Slices, nt)
	im.Affine = c.Affine()
	im.Acq = append([]volume.Acquisition(nil), acq...)
	im.Source = volume.Source{Format: "synthetic", Description: c.Def.Name, FieldStrength: c.Field, Scanner: "TVX-SIM1"}
	rng := rand.New(rand.NewPCG(c.Seed, 0x7a75))
	nv := im.Voxels()
	acc := make([]float64, nt)
	halfZ := 0.0
	if b := c.Def.Body; b != nil {
		halfZ = b.Length / 2
	}
	for k := 0; k < c.Slices; k++ {
		for j := 0; j < n; j++ {
			for i := 0; i < n; i++ {
				for t := range acc {
					acc[t] = 0
				}
				_, _, z := im.Affine.Apply(float64(i), float64(j), float64(k))
				inside := halfZ == 0 || math.Abs(z-c.Center[2]) <= halfZ
				for si := 0; si < sub; si++ {
					for sj := 0; sj < sub; sj++ {
						fi := float64(i) + (float64(si)+0.5)/sub - 0.5
						fj := float64(j) + (float64(sj)+0.5)/sub - 0.5
						x, y, z := im.Affine.Apply(fi, fj, float64(k))
						px, py := c.ToPhantom(x, y)
						r := -2
						if inside {
							r = c.region(px, py, c.axial(z))
						}
						for t := range acc {
							acc[t] += sig[r+2][t]
						}
					}
				}
				v := i + n*(j+n*k)
				for t := range acc {
					a := acc[t] / (sub * sub)
					if c.Sigma > 0 {
						a = fit.Rician(rng, a, c.Sigma)
					}
					im.Data[t*nv+v] = float32(a)
				}
			}
		}
	}
	return im, nil
}

// Truth returns the true map of quantity q ("T1", "T2", "T2star", "PD")
// on the scene's grid: the vial's value where the whole voxel lies inside
// one vial, NaN elsewhere (fill, air and partial-volume voxels).
func (s *Scene) Truth(q string) (*volume.Image, error) {
	c := s.defaults()
	mats := make([]fit.Tissue, len(c.Def.Vials))
	for i := range mats {
		var err error
		if mats[i], err = c.Material(&c.Def.Vials[i]); err != nil {
			return nil, err
		}
	}
	n := c.Matrix
	im := volume.New(n, n, c.Slices, 1)
	im.Affine = c.Affine()
	for k := 0; k < c.Slices; k++ {
		for j := 0; j < n; j++ {
			for i := 0; i < n; i++ {
				val := math.NaN()
				r0 := -3
				pure := true
				for _, d := range [][2]float64{{-0.5, -0.5}, {0.5, -0.5}, {-0.5, 0.5}, {0.5, 0.5}, {0, 0}} {
					x, y, z := im.Affine.Apply(float64(i)+d[0], float64(j)+d[1], float64(k))
					px, py := c.ToPhantom(x, y)
					r := c.region(px, py, c.axial(z))
					if r0 == -3 {
						r0 = r
					} else if r != r0 {
						pure = false
					}
				}
				if pure && r0 >= 0 {
					m := mats[r0]
					switch q {
					case "T1":
						val = m.T1
					case "T2":
						val = m.T2
					case "T2star":
						val = m.T2star
					case "PD":
						val = m.PD
					default:
						return nil, fmt.Errorf("phantom: no truth for %q", q)
					}
				}
				im.Data[i+n*(j+n*k)] = float32(val)
			}
		}
	}
	return im, nil
}
