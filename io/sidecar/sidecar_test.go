package sidecar

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// Units: BIDS metadata: EchoTime/InversionTime/RepetitionTime in seconds,
// FlipAngle in degrees, MagneticFieldStrength in tesla [check-values §3.6,
// BIDS metadata.yaml]; tauvox uses ms inside (volume).

func TestParse(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name string
		json string
		nt   int
		want []volume.Acquisition
		b0   float64
	}{
		{"MESE echo list", `{"EchoTime":[0.01,0.02,0.03],"RepetitionTime":3,"FlipAngle":90}`, 3,
			[]volume.Acquisition{acq(10, nan, 3000, 90), acq(20, nan, 3000, 90), acq(30, nan, 3000, 90)}, nan},
		{"IR inversion list", `{"InversionTime":[0.05,0.4,1.1,2.5],"EchoTime":0.012,"RepetitionTime":10,"MagneticFieldStrength":1.5}`, 4,
			[]volume.Acquisition{acq(12, 50, 10000, nan), acq(12, 400, 10000, nan), acq(12, 1100, 10000, nan), acq(12, 2500, 10000, nan)}, 1.5},
		{"VFA flip list, excitation TR wins", `{"FlipAngle":[3,15],"RepetitionTime":4,"RepetitionTimeExcitation":0.015,"EchoTime":0.002}`, 2,
			[]volume.Acquisition{acq(2, nan, 15, 3), acq(2, nan, 15, 15)}, nan},
		{"scalar only, one volume", `{"EchoTime":0.005}`, 1, []volume.Acquisition{acq(5, nan, nan, nan)}, nan},
		{"list of one, one volume", `{"EchoTime":[0.005]}`, 1, []volume.Acquisition{acq(5, nan, nan, nan)}, nan},
		{"nothing", `{}`, 2, []volume.Acquisition{acq(nan, nan, nan, nan), acq(nan, nan, nan, nan)}, nan},
		{"null is absent", `{"EchoTime":null,"InversionTime":0}`, 1, []volume.Acquisition{acq(nan, 0, nan, nan)}, nan},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := Parse([]byte(c.json), "scan.json")
			if err != nil {
				t.Fatal(err)
			}
			got, err := s.Acquisitions(c.nt)
			if err != nil {
				t.Fatal(err)
			}
			for i := range c.want {
				if !same(got[i], c.want[i]) {
					t.Errorf("volume %d: %+v, want %+v", i, got[i], c.want[i])
				}
			}
			if !(s.MagneticFieldStrength == c.b0 || math.IsNaN(s.MagneticFieldStrength) && math.IsNaN(c.b0)) {
				t.Errorf("field %g, want %g", s.MagneticFieldStrength, c.b0)
			}
		})
	}
}

func acq(te, ti, tr, fa float64) volume.Acquisition {
	return volume.Acquisition{EchoTime: te, InversionTime: ti, RepetitionTime: tr, FlipAngle: fa}
}

// same compares within 1e-12 ms (s → ms multiplies by 1000 in float64),
// NaN equal to NaN.
func same(a, b volume.Acquisition) bool {
	eq := func(x, y float64) bool {
		return math.IsNaN(x) && math.IsNaN(y) || math.Abs(x-y) <= 1e-12*math.Max(1, math.Abs(y))
	}
	return eq(a.EchoTime, b.EchoTime) && eq(a.InversionTime, b.InversionTime) &&
		eq(a.RepetitionTime, b.RepetitionTime) && eq(a.FlipAngle, b.FlipAngle)
}

func TestBadSidecars(t *testing.T) {
	cases := []struct{ json, want string }{
		{`{"EchoTime":"10ms"}`, "scan.json: EchoTime: expected a number or a list of numbers"},
		{`{"EchoTime":[0.01,"x"]}`, "scan.json: EchoTime: item 2: expected a number"},
		{`{"EchoTime":[0.01,null]}`, "scan.json: EchoTime: item 2: expected a number"},
		{`{"EchoTime":[]}`, "scan.json: EchoTime: empty list"},
		{`{"EchoTime":{"a":1}}`, "scan.json: EchoTime: expected a number or a list of numbers"},
		{`{"EchoTime":true}`, "scan.json: EchoTime: expected a number or a list of numbers"},
		{`{"EchoTime":1e400}`, "scan.json: EchoTime: expected a number or a list of numbers"},
		{`{"EchoTime":-0.01}`, "scan.json: EchoTime: -0.01 s is not a valid time"},
		{`{"EchoTime":0}`, "scan.json: EchoTime: 0 s is not a valid time"},
		{`{"EchoTime":[10,20,30]}`, "scan.json: EchoTime: 10 s is implausibly long (above 1 s); sidecar times are in seconds (BIDS): was 10 ms (0.01 s) meant?"},
		{`{"EchoTime":12}`, "scan.json: EchoTime: 12 s is implausibly long (above 1 s); sidecar times are in seconds (BIDS): was 12 ms (0.012 s) meant?"},
		{`{"InversionTime":-1}`, "scan.json: InversionTime: -1 s is not a valid time"},
		{`{"InversionTime":[100,500]}`, "scan.json: InversionTime: 100 s is implausibly long (above 30 s); sidecar times are in seconds (BIDS): was 100 ms (0.1 s) meant?"},
		{`{"RepetitionTime":2500}`, "scan.json: RepetitionTime: 2500 s is implausibly long (above 60 s); sidecar times are in seconds (BIDS): was 2500 ms (2.5 s) meant?"},
		{`{"RepetitionTimeExcitation":0}`, "scan.json: RepetitionTimeExcitation: 0 s is not a valid time"},
		{`{"FlipAngle":0}`, "scan.json: FlipAngle: 0 degrees is outside (0, 180]; sidecar flip angles are in degrees (BIDS)"},
		{`{"FlipAngle":[10, 400]}`, "scan.json: FlipAngle: 400 degrees is outside (0, 180]; sidecar flip angles are in degrees (BIDS)"},
		{`{"FlipAngle":270}`, "scan.json: FlipAngle: 270 degrees is outside (0, 180]; sidecar flip angles are in degrees (BIDS)"},
		{`{"FlipAngle":[0.0349066, 0.261799, 0.523599]}`, "scan.json: FlipAngle: 0.0349066,0.261799,0.523599 look like radians; sidecar flip angles are in degrees (BIDS): was 2,15,30° meant?"},
		{`{"MagneticFieldStrength":[3]}`, "scan.json: MagneticFieldStrength: expected a number"},
		{`{"MagneticFieldStrength":3000}`, "scan.json: MagneticFieldStrength: 3000 T is not a plausible field strength"},
		{`{"Manufacturer":7}`, "scan.json: Manufacturer: expected a string"},
		{`{"AcquisitionDateTime":"yesterday"}`, `scan.json: AcquisitionDateTime: "yesterday" is not a date-time like 2024-05-01T10:20:30`},
		{`{"AcquisitionDateTime":"2024-13-01T10:20:30"}`, `scan.json: AcquisitionDateTime: "2024-13-01T10:20:30" is not a date-time like 2024-05-01T10:20:30`},
		{`{"AcquisitionDate":"01.05.2024"}`, `scan.json: AcquisitionDate: "01.05.2024" is not a date like 2024-05-01`},
		{`{"AcquisitionTime":"25:00:00"}`, `scan.json: AcquisitionTime: "25:00:00" is not a time like 10:20:30`},
		{`[1,2]`, "scan.json: not a JSON object"},
		{`null`, "scan.json: not a JSON object"},
		{`{"EchoTime":0.01} {}`, "scan.json: invalid JSON: data after the top-level object"},
		{`{"EchoTime":0.01`, "scan.json: invalid JSON: unexpected EOF"},
		{``, "scan.json: invalid JSON: EOF"},
	}
	for _, c := range cases {
		_, err := Parse([]byte(c.json), "scan.json")
		if err == nil {
			t.Errorf("%s: no error", c.json)
			continue
		}
		if err.Error() != c.want {
			t.Errorf("%s:\n got %q\nwant %q", c.json, err.Error(), c.want)
		}
		var e *Error
		if !errors.As(err, &e) {
			t.Errorf("%s: %T is not *Error", c.json, err)
		}
	}
}

func TestAcquisitionsLength(t *testing.T) {
	s, err := Parse([]byte(`{"EchoTime":[0.01,0.02,0.03,0.04,0.05,0.06,0.07,0.08]}`), "scan.json")
	if err != nil {
		t.Fatal(err)
	}
	_, err = s.Acquisitions(16)
	if want := "scan.json: EchoTime: lists 8 values but the image has 16 volumes"; err == nil || err.Error() != want {
		t.Errorf("error %v, want %s", err, want)
	}
	s, _ = Parse([]byte(`{"FlipAngle":[20]}`), "scan.json")
	if _, err := s.Acquisitions(3); err == nil || err.Error() != "scan.json: FlipAngle: lists 1 value but the image has 3 volumes" {
		t.Errorf("list of one for three volumes: %v", err)
	}
	if _, err := s.Acquisitions(0); err == nil {
		t.Error("nt 0 accepted")
	}
}

func TestReadCommitted(t *testing.T) {
	img := "../../testdata/nifti/f32_4d.nii.gz"
	p, ok := ForImage(img)
	if !ok || p != "../../testdata/nifti/f32_4d.json" {
		t.Fatalf("ForImage = %q, %v", p, ok)
	}
	s, err := Read(p)
	if err != nil {
		t.Fatal(err)
	}
	acq, err := s.Acquisitions(4)
	if err != nil {
		t.Fatal(err)
	}
	for i, a := range acq {
		if want := float64(10 * (i + 1)); math.Abs(a.EchoTime-want) > 1e-12 || a.RepetitionTime != 2500 || a.FlipAngle != 90 || !math.IsNaN(a.InversionTime) {
			t.Errorf("volume %d: %+v", i, a)
		}
	}
	src := volume.Source{FieldStrength: math.NaN()}
	s.ApplySource(&src)
	if src.FieldStrength != 3 || src.Scanner != "DEMO-MR1" || src.AcquiredAt != "2024-05-01T10:20:30.125000" || src.Description != "demo multi-echo spin echo" {
		t.Errorf("source %+v", src)
	}
}

func TestDateAndTime(t *testing.T) {
	s, err := Parse([]byte(`{"AcquisitionDate":"2023-02-28","AcquisitionTime":"08:05:00.5"}`), "x.json")
	if err != nil || s.AcquisitionDateTime != "2023-02-28T08:05:00.5" {
		t.Errorf("%v %q", err, s.AcquisitionDateTime)
	}
	s, err = Parse([]byte(`{"AcquisitionTime":"08:05:00"}`), "x.json")
	if err != nil || s.AcquisitionDateTime != "" {
		t.Errorf("time alone: %v %q", err, s.AcquisitionDateTime)
	}
}

func TestForImage(t *testing.T) {
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "a.json"), []byte("{}"), 0o644)
	os.Mkdir(filepath.Join(dir, "b.json"), 0o755)
	for _, c := range []struct {
		img, want string
		ok        bool
	}{
		{"a.nii.gz", "a.json", true},
		{"a.NII", "a.json", true},
		{"a.hdr", "a.json", true},
		{"b.nii", "b.json", false}, // a folder, not a file
		{"c.nii.gz", "c.json", false},
	} {
		p, ok := ForImage(filepath.Join(dir, c.img))
		if p != filepath.Join(dir, c.want) || ok != c.ok {
			t.Errorf("ForImage(%s) = %s, %v", c.img, p, ok)
		}
	}
}

func TestReadErrors(t *testing.T) {
	if _, err := Read("no/such.json"); err == nil || err.Error() != "no/such.json: cannot open: no such file or directory" || !errors.Is(err, os.ErrNotExist) {
		t.Errorf("missing file: %v", err)
	}
}

func TestParseList(t *testing.T) {
	ok := []struct {
		in   string
		want []float64
	}{
		{"10,20,30", []float64{10, 20, 30}},
		{" 10 , 20 ", []float64{10, 20}},
		{"10:10:50", []float64{10, 20, 30, 40, 50}},
		{"10:10:55", []float64{10, 20, 30, 40, 50}},
		{"0.1:0.1:0.3", []float64{0.1, 0.2, 0.30000000000000004}},
		{"5,10:10:30,100", []float64{5, 10, 20, 30, 100}},
		{"7:1:7", []float64{7}},
		{"0", []float64{0}},
		{"30,20", []float64{30, 20}}, // ordering is the caller's business
		{"1e3", []float64{1000}},
	}
	for _, c := range ok {
		got, err := ParseList(c.in)
		if err != nil {
			t.Errorf("%q: %v", c.in, err)
			continue
		}
		if len(got) != len(c.want) {
			t.Errorf("%q = %v, want %v", c.in, got, c.want)
			continue
		}
		for i := range got {
			if math.Abs(got[i]-c.want[i]) > 1e-12 {
				t.Errorf("%q = %v, want %v", c.in, got, c.want)
			}
		}
	}
	bad := []struct{ in, want string }{
		{"", `list "": empty`},
		{"10,,20", `list "10,,20": item 2 "": empty item`},
		{"10,abc", `list "10,abc": item 2 "abc": "abc" is not a finite number`},
		{"NaN", `list "NaN": item 1 "NaN": "NaN" is not a finite number`},
		{"10,inf", `list "10,inf": item 2 "inf": "inf" is not a finite number`},
		{"-5", `list "-5": item 1 "-5": negative value`},
		{"10:0:20", `list "10:0:20": item 1 "10:0:20": the step of start:step:stop must be positive`},
		{"10:-1:0", `list "10:-1:0": item 1 "10:-1:0": the step of start:step:stop must be positive`},
		{"30:10:10", `list "30:10:10": item 1 "30:10:10": stop is below start`},
		{"1:2", `list "1:2": item 1 "1:2": want a number or start:step:stop`},
		{"0:1e-9:1e9", `list "0:1e-9:1e9": item 1 "0:1e-9:1e9": expands to more than 100000 values`},
	}
	for _, c := range bad {
		_, err := ParseList(c.in)
		if err == nil || err.Error() != c.want {
			t.Errorf("%q: error %v\nwant %s", c.in, err, c.want)
		}
	}
}

// FuzzRead feeds arbitrary JSON to the sidecar parser (seeded from the
// committed sidecar and the table above): it must not panic, errors must
// be one line naming the file, and an accepted sidecar must give
// Acquisitions with finite or NaN values in ms.
func FuzzRead(f *testing.F) {
	if b, err := os.ReadFile("../../testdata/nifti/f32_4d.json"); err == nil {
		f.Add(b)
	}
	for _, s := range []string{`{"EchoTime":[0.01,0.02]}`, `{"InversionTime":0.1,"FlipAngle":[5,10]}`, `{"AcquisitionDate":"2023-02-28","AcquisitionTime":"08:05:00.5"}`, `[]`, `{"MagneticFieldStrength":3}`} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Parse(data, "fuzz.json")
		if err != nil {
			if m := err.Error(); !strings.HasPrefix(m, "fuzz.json: ") || strings.ContainsAny(m, "\n\r") {
				t.Fatalf("bad error %q", m)
			}
			return
		}
		for _, nt := range []int{1, 2, 3} {
			acq, err := s.Acquisitions(nt)
			if err != nil {
				continue
			}
			for _, a := range acq {
				for _, v := range []float64{a.EchoTime, a.InversionTime, a.RepetitionTime, a.FlipAngle} {
					if math.IsInf(v, 0) || v < 0 {
						t.Fatalf("bad value %g in %+v", v, a)
					}
				}
			}
		}
	})
}

// TestTidy: rounding residue goes, strings and short numbers stay.
func TestTidy(t *testing.T) {
	in := `{"a": 700.0000000000001, "b": [7.699999999999999, -0.7000000000000001], "s": "1.00000000000000001 \"2.3000000000000003\"", "c": 12, "d": 0.9407126783277835, "e": 1e-7, "f": 95.66499999999999, "g": 1.2345678901234567e-9}`
	want := `{"a": 700, "b": [7.7, -0.7], "s": "1.00000000000000001 \"2.3000000000000003\"", "c": 12, "d": 0.940712678328, "e": 1e-7, "f": 95.665, "g": 1.23456789012e-09}`
	if got := string(Tidy([]byte(in))); got != want {
		t.Errorf("Tidy\n got %s\nwant %s", got, want)
	}
}
