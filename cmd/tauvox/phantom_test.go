package main

import (
	"encoding/json"
	"fmt"
	stdhtml "html"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/roi/phantom"
)

// fitted simulates a kind with the given simulate flags and fits it,
// returning the fit output folder.
func fitted(t *testing.T, kind, model string, sim ...string) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "sim")
	args := append([]string{"simulate", "--kind", kind, "--out", dir, "--date", "2026-10-05", "--time", "08:15"}, sim...)
	if code, _, stderr := tauvox(t, args...); code != 0 {
		t.Fatalf("simulate: %s", stderr)
	}
	out := filepath.Join(t.TempDir(), "fit")
	if code, _, stderr := tauvox(t, "fit", filepath.Join(dir, kind+".nii.gz"), "--model", model, "--out", out, "--quiet"); code != 0 {
		t.Fatalf("fit: %s", stderr)
	}
	return out
}

// TestPhantomCommand: a turned, shifted demo phantom passes; one drifting
// vial fails with exit code 1; qa.json carries the session identity from the
// sidecar and the localisation.
func TestPhantomCommand(t *testing.T) {
	place := []string{"--center", "-22,17,0", "--rotation", "211", "--temperature", "24"}
	t2 := fitted(t, "t2", "t2", place...)
	ir := fitted(t, "t1-ir", "t1-ir", place...)
	out := filepath.Join(t.TempDir(), "qa")
	code, stdout, stderr := tauvox(t, "phantom", t2, ir, "--def", "demo", "--temperature", "24", "--out", out)
	if code != 0 {
		t.Fatalf("exit %d: %s\n%s", code, stderr, stdout)
	}
	var qa phantom.QA
	b, err := os.ReadFile(filepath.Join(out, "qa.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &qa); err != nil {
		t.Fatal(err)
	}
	if qa.Format != phantom.QAFormat || qa.Session.Scanner != "TVX-SIM1" || qa.Session.Date != "2026-10-05" || qa.Session.Time != "08:15" ||
		qa.Session.Field != 1.5 || qa.Session.Temperature != 24 || qa.Verdict != phantom.Pass || len(qa.Vials) != 20 || len(qa.Series) != 2 {
		t.Errorf("qa.json: %+v", qa.Session)
	}
	for _, s := range qa.Series {
		l := s.Localisation
		if d := (l.Center[0]+22)*(l.Center[0]+22) + (l.Center[1]-17)*(l.Center[1]-17); d > 1 || l.Rotation < 209 || l.Rotation > 213 {
			t.Errorf("%s localisation %+v", s.Quantity, l)
		}
		if s.Model == "" || len(s.Inputs) == 0 || len(s.Protocol) == 0 {
			t.Errorf("series provenance missing: %+v", s)
		}
	}
	for _, f := range []string{"qa.csv", "report.html"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Error(err)
		}
	}
	csv, _ := os.ReadFile(filepath.Join(out, "qa.csv"))
	if !strings.HasPrefix(string(csv), "vial,quantity,n,mean_ms,median_ms,sd_ms") || strings.Count(string(csv), "\n") != 21 {
		t.Errorf("qa.csv:\n%s", csv)
	}

	// Vials whose material drifted by +15 % and −15 %: both fail, and the
	// deviation is signed (100·(median − reference)/reference, design.md)
	// in qa.json, qa.csv, the printed table and report.html.
	t2d := fitted(t, "t2", "t2", append(place, "--drift", "A6=1.15", "--drift", "B2=0.85")...)
	out2 := filepath.Join(t.TempDir(), "qa")
	code, stdout, _ = tauvox(t, "phantom", t2d, "--def", "demo", "--temperature", "24", "--out", out2)
	if code != 1 || !strings.Contains(stdout, "FAIL") {
		t.Errorf("drifting vial: exit %d\n%s", code, stdout)
	}
	b, err = os.ReadFile(filepath.Join(out2, "qa.json"))
	if err != nil {
		t.Fatal("a failed verdict must still write its outputs")
	}
	var qa2 phantom.QA
	if err := json.Unmarshal(b, &qa2); err != nil {
		t.Fatal(err)
	}
	csv2, _ := os.ReadFile(filepath.Join(out2, "qa.csv"))
	raw, _ := os.ReadFile(filepath.Join(out2, "report.html"))
	html := stdhtml.UnescapeString(string(raw)) // html/template writes + as &#43;
	for _, v := range qa2.Vials {
		want, ok := map[string]float64{"A6": 15, "B2": -15}[v.ID]
		if !ok {
			continue
		}
		// The fitted T2 is within 0.5 percentage points of the drifted
		// truth here (observed +14.75 and −14.88: twice the worst
		// observed difference); the sign must be the drift's.
		if v.Verdict != phantom.Fail || math.Abs(v.Deviation-want) > 0.5 {
			t.Errorf("vial %s: %s, deviation %+.3f %%, want %+.0f %% ± 0.5", v.ID, v.Verdict, v.Deviation, want)
			continue
		}
		row := fmt.Sprintf("%s,T2,%d,", v.ID, v.N)
		field := fmtNum(v.Deviation, 2)
		if !strings.Contains(string(csv2), row) || !strings.Contains(string(csv2), ","+field+",") || (want < 0) != strings.HasPrefix(field, "-") {
			t.Errorf("vial %s: qa.csv lacks the signed deviation %s:\n%s", v.ID, field, csv2)
		}
		if !strings.Contains(stdout, field) {
			t.Errorf("vial %s: printed table lacks the signed deviation %s:\n%s", v.ID, field, stdout)
		}
		// The report writes the minus as U+2212 (html/template may write
		// "+" as "&#43;": compared unescaped).
		if cell := strings.Replace(fmt.Sprintf("%+.1f %%", v.Deviation), "-", "−", 1); !strings.Contains(stdhtml.UnescapeString(html), cell) {
			t.Errorf("vial %s: report.html lacks the signed deviation %q", v.ID, cell)
		}
	}
}

func TestPhantomBadInput(t *testing.T) {
	t2 := fitted(t, "t2", "t2")
	dir := t.TempDir()
	noRef := filepath.Join(dir, "noref.json")
	os.WriteFile(noRef, []byte(`{"format":"tauvox-phantom/1","name":"x","vials":[{"id":"a","x_mm":0,"y_mm":0,"radius_mm":5}],"tolerance":{}}`), 0o644)
	// A status map on another grid than the T2 map.
	odd := filepath.Join(dir, "odd")
	os.Mkdir(odd, 0o755)
	for _, f := range []string{"T2map.nii.gz", "M0map.nii.gz"} {
		b, _ := os.ReadFile(filepath.Join(t2, f))
		os.WriteFile(filepath.Join(odd, f), b, 0o644)
	}
	small := fitted(t, "t2", "t2", "--matrix", "40")
	b, _ := os.ReadFile(filepath.Join(small, "status.nii.gz"))
	os.WriteFile(filepath.Join(odd, "status.nii.gz"), b, 0o644)
	cases := []struct {
		name string
		args []string
		want string
	}{
		{"missing reference", []string{"phantom", t2, "--def", noRef, "--temperature", "20"}, "vial a has no reference values"},
		{"temperature outside", []string{"phantom", t2, "--def", "demo", "--temperature", "40"}, "16–28 °C, session 40 °C"},
		{"different grids", []string{"phantom", odd, "--def", "demo", "--temperature", "20"}, "different grids"},
		{"no temperature", []string{"phantom", t2, "--def", "demo"}, "--temperature is required"},
		{"bad date", []string{"phantom", t2, "--def", "demo", "--temperature", "20", "--date", "05/10/2026"}, "want YYYY-MM-DD"},
		{"not a map", []string{"phantom", filepath.Join(t2, "provenance.json"), "--def", "demo", "--temperature", "20"}, "not a T1map or T2map"},
	}
	for _, c := range cases {
		out := filepath.Join(t.TempDir(), "qa")
		code, _, stderr := tauvox(t, append(c.args, "--out", out)...)
		if code != 2 || !strings.Contains(stderr, c.want) || strings.Count(strings.TrimSpace(stderr), "\n") > 0 {
			t.Errorf("%s: exit %d %q, want 2 and …%s", c.name, code, stderr, c.want)
		}
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%s: output written", c.name)
		}
	}
}

func TestROICommand(t *testing.T) {
	t2 := fitted(t, "t2", "t2")
	dir := t.TempDir()
	list := filepath.Join(dir, "r.csv")
	// Vial A1 of the unturned demo phantom sits at (0, 56) mm.
	os.WriteFile(list, []byte("name,x,y,z,radius,space\nA1,0,56,0,7,mm\n"), 0o644)
	out := filepath.Join(dir, "stats.csv")
	if code, _, stderr := tauvox(t, "roi", t2, "--rois", list, "--out", out); code != 0 {
		t.Fatal(stderr)
	}
	b, _ := os.ReadFile(out)
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	if lines[0] != "region,map,unit,n,voxels,mean,sd,median,q1,q3,iqr,min,max,cov,failed_fraction" {
		t.Errorf("header %q", lines[0])
	}
	found := false
	for _, l := range lines[1:] {
		if strings.HasPrefix(l, "A1,T2map,ms,") {
			found = true
			f := strings.Split(l, ",")
			// The truth at 20 °C, 1.5 T is 22.0 ms (demo.json).
			if !strings.HasPrefix(f[7], "22.") && !strings.HasPrefix(f[7], "21.9") {
				t.Errorf("A1 median T2 %s, want ≈ 22 ms", f[7])
			}
		}
	}
	if !found {
		t.Errorf("no A1,T2map row:\n%s", b)
	}
	if code, _, _ := tauvox(t, "roi", t2, "--rois", list, "--out", out); code != 2 {
		t.Error("existing output accepted without --force")
	}
	far := filepath.Join(dir, "far.csv")
	os.WriteFile(far, []byte("name,x,y,z,radius,space\nnowhere,900,0,0,5,mm\n"), 0o644)
	code, _, stderr := tauvox(t, "roi", t2, "--rois", far, "--out", filepath.Join(dir, "x.csv"))
	if code != 2 || !strings.Contains(stderr, `"nowhere"`) {
		t.Errorf("region outside: %d %s", code, stderr)
	}
	jsonOut := filepath.Join(dir, "s.json")
	if code, _, stderr := tauvox(t, "roi", filepath.Join(t2, "T2map.nii.gz"), "--rois", list, "--out", jsonOut, "--json"); code != 0 {
		t.Fatal(stderr)
	}
	var rows []map[string]any
	b, _ = os.ReadFile(jsonOut)
	if err := json.Unmarshal(b, &rows); err != nil || len(rows) != 1 || rows[0]["unit"] != "ms" {
		t.Errorf("json: %v %s", err, b)
	}
}
