package phantom

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

func TestReferenceAt(t *testing.T) {
	v := Vial{ID: "X", Reference: map[string][]Row{"T1": {
		{Field: 1.5, Temperature: 18, Value: 98, Uncertainty: 1},
		{Field: 1.5, Temperature: 22, Value: 103, Uncertainty: 2},
		{Field: 3, Temperature: 20, Value: 120, Uncertainty: 1},
	}}}
	cases := []struct {
		field, temp float64
		extra       bool
		want        float64
		err         error
	}{
		{1.5, 18, false, 98, nil},
		{1.5, 20, false, 100.5, nil}, // linear interpolation (design.md)
		{1.5, 21, false, 101.75, nil},
		{1.45, 22, false, 103, nil}, // closest field within 0.1 T
		{1.5, 24, false, 0, ErrOutOfRange},
		{1.5, 24, true, 105.5, nil},
		{3, 20, false, 120, nil},
	}
	for _, c := range cases {
		got, _, ok, err := v.ReferenceAt("T1", c.field, c.temp, c.extra)
		if !errors.Is(err, c.err) || !ok || (c.err == nil && math.Abs(got-c.want) > 1e-9) {
			t.Errorf("%g T %g °C: %g %v %v, want %g %v", c.field, c.temp, got, ok, err, c.want, c.err)
		}
	}
	if _, _, ok, _ := v.ReferenceAt("T1", 7, 20, false); ok {
		t.Error("reference at 7 T reported")
	}
}

func TestParseErrors(t *testing.T) {
	cases := []struct{ json, want string }{
		{`{"format":"x"}`, `format "x", want "tauvox-phantom/1"`},
		{`{"format":"tauvox-phantom/1","vials":[]}`, "no vials"},
		{`{"format":"tauvox-phantom/1","vials":[{"id":"a","x_mm":0,"y_mm":0,"radius_mm":0}]}`, "vial a: position and a positive radius are required"},
		{`{"format":"tauvox-phantom/1","vials":[{"id":"a","radius_mm":1,"reference":{"T1":[{"field_T":1.5,"temperature_C":20,"value_ms":3}]}},{"id":"a","radius_mm":1}]}`, `vial id "a" appears twice`},
		{`{"format":"tauvox-phantom/1","vials":[{"id":"a","radius_mm":1}]}`, "vial a has no reference values"},
		{`{"format":"tauvox-phantom/1","vials":[{"id":"a","radius_mm":1,"reference":{"T2":[]}}]}`, "vial a: T2 reference is empty"},
		{`{"format":"tauvox-phantom/1","colour":1}`, `unknown field "colour"`},
		{`{"format":"tauvox-phantom/1","vials":[{"id":"a","radius_mm":1,"reference":{"T1":[{"field_T":1.5,"temperature_C":20,"value_ms":-3}]}}]}`, "T1 reference row needs"},
		{`{"format":"tauvox-phantom/1","vials":[{"id":"a","radius_mm":1,"shape":"cone","reference":{"T1":[{"field_T":1.5,"temperature_C":20,"value_ms":3}]}}]}`, `vial a: shape "cone" unknown`},
		{`{"format":"tauvox-phantom/1","body":{"radius_mm":50},"vials":[{"id":"a","x_mm":45,"radius_mm":6,"reference":{"T1":[{"field_T":1.5,"temperature_C":20,"value_ms":3}]}}]}`, "vial a: x_mm, y_mm and radius_mm place it outside the body"},
		{`{"format":"tauvox-phantom/1","body":{"radius_mm":50,"length_mm":20},"vials":[{"id":"a","z_mm":8,"shape":"sphere","radius_mm":6,"reference":{"T1":[{"field_T":1.5,"temperature_C":20,"value_ms":3}]}}]}`, "vial a: z_mm and radius_mm place it outside the body"},
		{`{"format":"tauvox-phantom/1","vials":[{"id":"a","z_mm":1e400,"radius_mm":6}]}`, "z_mm"},
	}
	// A z_mm set from code that is not finite.
	d := Demo()
	d.Vials[0].Z = math.Inf(1)
	if err := d.check(); err == nil || !strings.Contains(err.Error(), "z_mm must be a finite number") {
		t.Errorf("infinite z_mm: %v", err)
	}
	for _, c := range cases {
		_, err := Parse([]byte(c.json), "p.json")
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "p.json: ") {
			t.Errorf("%s: error %v, want …%s", c.json, err, c.want)
		}
	}
}

func TestDemoAndSimulation(t *testing.T) {
	d := Demo()
	if len(d.Vials) < 8 {
		t.Fatalf("%d vials", len(d.Vials))
	}
	sc := &Scene{Def: d, Temperature: 21, Center: [3]float64{14, -9, 0}, Rotation: 33, Sigma: -1}
	acq := make([]volume.Acquisition, 4)
	for i := range acq {
		acq[i] = volume.Unknown()
		acq[i].EchoTime = 10 * float64(i+1)
		acq[i].RepetitionTime = 1e9
	}
	im, err := sc.Series(fit.SeqSpinEcho, acq)
	if err != nil {
		t.Fatal(err)
	}
	truth, err := sc.Truth("T2")
	if err != nil {
		t.Fatal(err)
	}
	// At each vial centre the noiseless spin-echo signal is
	// 1000·PD·exp(−TE/T2) with T2 from the table at 21 °C.
	for _, v := range d.Vials {
		x, y := sc.FromPhantom(v.X, v.Y)
		inv, _ := im.Affine.Inverse()
		fi, fj, _ := inv.Apply(x, y, 0)
		i, j := int(math.Round(fi)), int(math.Round(fj))
		t2, _, _, _ := v.ReferenceAt("T2", 1.5, 21, false)
		want := 1000 * v.PD * math.Exp(-20/t2)
		got := float64(im.Data[im.Index(i, j, 1, 1)])
		if math.Abs(got-want) > 1e-3*want {
			t.Errorf("vial %s centre: signal %g, want %g", v.ID, got, want)
		}
		if tv := float64(truth.Data[truth.Index(i, j, 1, 0)]); math.Abs(tv-t2) > 1e-3 {
			t.Errorf("vial %s: truth %g, want %g", v.ID, tv, t2)
		}
	}
	if px, py := sc.ToPhantom(sc.FromPhantom(12, -34)); math.Abs(px-12) > 1e-9 || math.Abs(py+34) > 1e-9 {
		t.Errorf("round trip (%g, %g)", px, py)
	}
}
