package dicom

import (
	"errors"
	"math"
	"path/filepath"
	"strings"
	"testing"
)

// TestProtocolsFound: in one folder with inversion recovery as 7 series,
// variable flip angle as 6 series on the same grid, a localizer and an
// unrelated series (testdata/gen/dicom_protocols.py), Scan finds exactly
// two protocols, each joining its series in the order of the parameter,
// and loading one gives the grid nibabel computes (to 1e-4 mm).
func TestProtocolsFound(t *testing.T) {
	r := loadProtoRefs(t)
	c := scanOne(t, "protocols", nil)
	if len(c.Protocols) != 2 {
		for _, p := range c.Protocols {
			t.Logf("%s %s %v %s", p.ID, p.Varying, p.Series, p.Problem)
		}
		t.Fatalf("%d protocols, want 2", len(c.Protocols))
	}
	desc := func(ids []string) []string {
		var out []string
		for _, id := range ids {
			s, err := c.Lookup(id)
			if err != nil {
				t.Fatal(err)
			}
			out = append(out, s.Description)
		}
		return out
	}
	for _, tc := range []struct {
		varying string
		series  []string
		values  []float64
		affine  [][4]float64
	}{
		{"InversionTime", r.Protocols.IR.Series, r.Protocols.IR.TI, r.Protocols.IR.Affine},
		{"FlipAngle", r.Protocols.VFA.Series, r.Protocols.VFA.FA, r.Protocols.VFA.Affine},
	} {
		var p *Protocol
		for _, q := range c.Protocols {
			if q.Varying == tc.varying {
				p = q
			}
		}
		if p == nil || p.Problem != "" {
			t.Fatalf("no loadable %s protocol: %+v", tc.varying, p)
		}
		if got := strings.Join(desc(p.Series), ","); got != strings.Join(tc.series, ",") {
			t.Errorf("%s joins %s, want %s", tc.varying, got, strings.Join(tc.series, ","))
		}
		if len(p.Values) != len(tc.values) || p.Volumes != len(tc.values) || p.Slices != 3 {
			t.Fatalf("%s values %v volumes %d slices %d", tc.varying, p.Values, p.Volumes, p.Slices)
		}
		for i, v := range tc.values {
			if p.Values[i] != v {
				t.Errorf("%s value %d = %g, want %g", tc.varying, i, p.Values[i], v)
			}
		}
		im, err := LoadProtocol(p)
		if err != nil {
			t.Fatal(err)
		}
		if im.Dims != [4]int{8, 8, 3, len(tc.values)} {
			t.Fatalf("dims %v", im.Dims)
		}
		for i := 0; i < 3; i++ {
			for j := 0; j < 4; j++ {
				if d := math.Abs(im.Affine[i][j] - tc.affine[i][j]); d > 1e-4 {
					t.Errorf("%s affine[%d][%d] = %.6g, nibabel %.6g", tc.varying, i, j, im.Affine[i][j], tc.affine[i][j])
				}
			}
		}
		for i, a := range im.Acq {
			got := a.InversionTime
			if tc.varying == "FlipAngle" {
				got = a.FlipAngle
			}
			if got != tc.values[i] {
				t.Errorf("%s volume %d: %g, want %g", tc.varying, i, got, tc.values[i])
			}
		}
	}
	for _, s := range c.Series {
		if s.Description == "ir_ti300" && s.Fixed != "TI 300 ms, TR 6000 ms, TE 12 ms, FA 90°" {
			t.Errorf("fixed parameters %q", s.Fixed)
		}
	}
}

// TestProtocolConflicts: a repeated inversion time, another matrix and a
// second differing parameter each stop the join with one line naming the
// series and the values.
func TestProtocolConflicts(t *testing.T) {
	c := scanOne(t, "geometry/repeat-ti", nil)
	if len(c.Protocols) != 1 || !strings.Contains(c.Protocols[0].Problem, "InversionTime 300 ms is repeated: series 42-") {
		t.Fatalf("protocols %+v", c.Protocols)
	}
	if _, err := LoadProtocol(c.Protocols[0]); err == nil || !errors.Is(err, ErrIncomplete) {
		t.Errorf("load: %v", err)
	}

	c = scanOne(t, "protocols-mismatch", nil)
	for _, tc := range []struct {
		ids  []string
		want []string
	}{
		{[]string{"21", "22"}, []string{"series 22-", "cannot join series 21-", "matrix 8×6 (Columns×Rows) differs from 8×8"}},
		{[]string{"21", "23"}, []string{"differ in InversionTime and also in RepetitionTime", "6000 ms in 21-", "5000 ms in 23-"}},
		{[]string{"21", "21"}, []string{"named twice"}},
	} {
		_, err := c.Join(tc.ids)
		if err == nil {
			t.Errorf("join %v: no error", tc.ids)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(filepath.ToSlash(err.Error()), w) {
				t.Errorf("join %v: %q lacks %q", tc.ids, err, w)
			}
		}
		if strings.Contains(err.Error(), "\n") {
			t.Errorf("join %v: more than one line", tc.ids)
		}
	}
}

// TestEchoProtocol: a multi-echo spin echo exported as one series per
// echo time (ScanningSequence SE) is one protocol varying EchoTime, of
// echo kind "SE".
func TestEchoProtocol(t *testing.T) {
	c := scanOne(t, "geometry/echo-split", nil)
	if len(c.Protocols) != 1 {
		t.Fatalf("%d protocols", len(c.Protocols))
	}
	p := c.Protocols[0]
	if p.Problem != "" || p.Varying != "EchoTime" || p.Echo != "SE" || len(p.Values) != 4 || p.Values[3] != 80 || p.Description != "se_te (4 series)" {
		t.Errorf("protocol %+v", p)
	}
}
