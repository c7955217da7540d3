package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/roi/phantom"
)

// ring10Truth is the part of testdata/phantom-ring10/truth.json the test
// reads (outside data; see testdata/phantom-ring10/SOURCE.md).
type ring10Truth struct {
	Sessions []struct {
		Session     string                        `json:"session"`
		Temperature float64                       `json:"temperature_C"`
		FaceDown    bool                          `json:"face_down"`
		Rotation    float64                       `json:"rotation_deg"`
		Centres     map[string][3]float64         `json:"sphere_centres_ras_mm"`
		Values      map[string]map[string]float64 `json:"values"`
	} `json:"sessions"`
}

// TestPhantomRing10: the four sessions of the outside data set
// phantom-ring10 (ten spheres on a ring, any turn, two face down; only
// the values tell them apart) are fitted (t2 on the multi-echo series,
// t1-ir on the inversion-recovery one) and assessed, once with the
// definition as given (vials as cylinders, the default) and once with
// shape "sphere" added to every vial. Every session must be identified,
// every sphere placed within 1 mm of its true centre, and every median
// T1 and T2 within 3 % of the truth (the limit).
func TestPhantomRing10(t *testing.T) {
	dir := filepath.Join("testdata", "phantom-ring10")
	b, err := os.ReadFile(filepath.Join(dir, "truth.json"))
	if err != nil {
		t.Fatal(err)
	}
	var truth ring10Truth
	if err := json.Unmarshal(b, &truth); err != nil {
		t.Fatal(err)
	}
	defJSON, err := os.ReadFile(filepath.Join(dir, "phantom.json"))
	if err != nil {
		t.Fatal(err)
	}
	var raw map[string]any
	if err := json.Unmarshal(defJSON, &raw); err != nil {
		t.Fatal(err)
	}
	for _, v := range raw["vials"].([]any) {
		v.(map[string]any)["shape"] = "sphere"
	}
	sphJSON, _ := json.Marshal(raw)
	sphDef := filepath.Join(t.TempDir(), "phantom-spheres.json")
	if err := os.WriteFile(sphDef, sphJSON, 0o644); err != nil {
		t.Fatal(err)
	}
	defs := map[string]string{"as given": filepath.Join(dir, "phantom.json"), "spheres": sphDef}
	worst := map[string]float64{}
	for _, s := range truth.Sessions {
		work := t.TempDir()
		t2 := filepath.Join(work, "t2")
		t1 := filepath.Join(work, "t1")
		for _, f := range [][3]string{{"mese.nii.gz", "t2", t2}, {"ir.nii.gz", "t1-ir", t1}} {
			if code, _, stderr := tauvox(t, "fit", filepath.Join(dir, s.Session, f[0]), "--model", f[1], "--out", f[2], "--quiet"); code != 0 {
				t.Fatalf("%s fit %s: %s", s.Session, f[1], stderr)
			}
		}
		for name, def := range defs {
			out := filepath.Join(work, "qa-"+strings.ReplaceAll(name, " ", "-"))
			code, stdout, stderr := tauvox(t, "phantom", t1, t2, "--def", def, "--temperature", fmtNum(s.Temperature, 1), "--out", out)
			if code != 0 {
				t.Errorf("%s (%s): exit %d: %s\n%s", s.Session, name, code, stderr, stdout)
				continue
			}
			var qa phantom.QA
			b, err := os.ReadFile(filepath.Join(out, "qa.json"))
			if err != nil {
				t.Fatal(err)
			}
			if err := json.Unmarshal(b, &qa); err != nil {
				t.Fatal(err)
			}
			if qa.Identity == nil || qa.Identity.Status != phantom.IdentityFound {
				t.Errorf("%s (%s): identity %+v", s.Session, name, qa.Identity)
				continue
			}
			g := qa.Identity.Groups[0]
			t.Logf("%s (%s): turned %.1f° (truth %.1f°), face down %v (truth %v), residual %.2f mm, margin z %.1f, %d placements",
				s.Session, name, g.Chosen.Rotation, s.Rotation, g.Chosen.Mirrored, s.FaceDown, g.Residual, *g.Z, g.Placements)
			for _, v := range qa.Vials {
				c := s.Centres[v.ID]
				if d := math.Hypot(v.CenterMM[0]-c[0], v.CenterMM[1]-c[1]); d > 1 {
					t.Errorf("%s (%s) %s: placed %.1f mm from its true centre", s.Session, name, v.ID, d)
				}
				want := s.Values[v.ID][v.Quantity+"_ms"]
				dev := 100 * (v.Median - want) / want
				if math.Abs(dev) > math.Abs(worst[name]) {
					worst[name] = dev
				}
				if !(math.Abs(dev) <= 3) || v.Verdict != phantom.Pass {
					t.Errorf("%s (%s) %s %s: median %.1f ms, truth %.1f ms (%+.2f %%), verdict %s", s.Session, name, v.ID, v.Quantity, v.Median, want, dev, v.Verdict)
				}
			}
		}
	}
	for name, w := range worst {
		t.Logf("%s: worst sphere deviation from truth %+.2f %%", name, w)
	}
}
