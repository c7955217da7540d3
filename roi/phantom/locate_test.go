package phantom

import (
	"math"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

// m0Scene simulates the proton-density-like first echo of a spin-echo
// series of the demo phantom placed by the scene.
func m0Scene(t *testing.T, sc *Scene) *volume.Image {
	t.Helper()
	acq := []volume.Acquisition{volume.Unknown()}
	acq[0].EchoTime, acq[0].RepetitionTime = 10, 3000
	im, err := sc.Series(fit.SeqSpinEcho, acq)
	if err != nil {
		t.Fatal(err)
	}
	return im
}

// TestLocateRecoversPlacement: the demo phantom shifted up to 40 mm and
// turned by any angle, face up or down, is found to within 1 mm and 2°
// (the acceptance limits).
func TestLocateRecoversPlacement(t *testing.T) {
	cases := []struct {
		c      [3]float64
		rot    float64
		mirror bool
	}{
		{[3]float64{0, 0, 0}, 0, false},
		{[3]float64{40, 0, 0}, 37, false},
		{[3]float64{-28, 28, 0}, 90, false},
		{[3]float64{12, -35, 0}, 143.5, false},
		{[3]float64{-17, -9, 0}, 200, true},
		{[3]float64{25, 30, 0}, 271, false},
		{[3]float64{-38, 5, 0}, 333.3, true},
		{[3]float64{3, 3, 0}, 359, false},
	}
	def := Demo()
	for _, c := range cases {
		sc := &Scene{Def: def, Center: c.c, Rotation: c.rot, Mirror: c.mirror, Matrix: 112, Slices: 3, Seed: 5}
		im := m0Scene(t, sc)
		pl, err := Locate(im, def, nil)
		if err != nil {
			t.Fatalf("%+v: %v", c, err)
		}
		d := math.Hypot(pl.Center[0]-c.c[0], pl.Center[1]-c.c[1])
		da := angleDiff(pl.Rotation, c.rot)
		t.Logf("true (%g,%g) %g° mirror=%v → found (%.2f,%.2f) %.2f° mirror=%v; error %.2f mm %.2f°, residual %.2f mm, confidence %.2f",
			c.c[0], c.c[1], c.rot, c.mirror, pl.Center[0], pl.Center[1], pl.Rotation, pl.Mirrored, d, da, pl.Residual, pl.Confidence)
		if d > 1 || da > 2 || pl.Mirrored != c.mirror {
			t.Errorf("%+v: found centre (%.2f, %.2f) rotation %.2f mirrored %v", c, pl.Center[0], pl.Center[1], pl.Rotation, pl.Mirrored)
		}
		if pl.Slice != 1 {
			t.Errorf("slice %d, want the middle one", pl.Slice)
		}
	}
}

func TestLocateGiven(t *testing.T) {
	def := Demo()
	sc := &Scene{Def: def, Center: [3]float64{10, 5, 0}, Rotation: 60, Seed: 3}
	im := m0Scene(t, sc)
	c, r, m := [3]float64{10, 5, 0}, 60.0, false
	pl, err := Locate(im, def, &LocateOptions{Center: &c, Rotation: &r, Mirrored: &m})
	if err != nil {
		t.Fatal(err)
	}
	if pl.Method != "given" || pl.Center != c || pl.Rotation != 60 {
		t.Errorf("%+v", pl)
	}
	// A given rotation with a searched centre.
	pl, err = Locate(im, def, &LocateOptions{Rotation: &r})
	if err != nil || pl.Method != "mixed" || math.Hypot(pl.Center[0]-10, pl.Center[1]-5) > 1 {
		t.Errorf("%+v %v", pl, err)
	}
}

func TestLocateEmpty(t *testing.T) {
	im := volume.New(32, 32, 2, 1)
	if _, err := Locate(im, Demo(), nil); err == nil {
		t.Error("phantom found in an empty image")
	}
}
