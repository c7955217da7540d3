package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// withSidecar copies the simulated series src into a new folder with its
// sidecar changed by edit, and returns the new series path.
func withSidecar(t *testing.T, src string, edit func(map[string]any)) string {
	t.Helper()
	dir := t.TempDir()
	dst := filepath.Join(dir, filepath.Base(src))
	b, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(dst, b, 0o644); err != nil {
		t.Fatal(err)
	}
	js := strings.TrimSuffix(src, ".nii.gz") + ".json"
	var side map[string]any
	b, err = os.ReadFile(js)
	if err != nil || json.Unmarshal(b, &side) != nil {
		t.Fatalf("%s: %v", js, err)
	}
	edit(side)
	b, _ = json.Marshal(side)
	if err := os.WriteFile(strings.TrimSuffix(dst, ".nii.gz")+".json", b, 0o644); err != nil {
		t.Fatal(err)
	}
	return dst
}

// TestUnitGuards (issue 17): times and flip angles in the wrong unit, on
// the command line or in the sidecar, are refused with exit 2 and one line
// naming the unit tauvox expects and what was probably meant; the same
// series with the right units fits, and a list that replaces different
// sidecar values says so in one line. The limits are common practice (see
// series.CheckUnits and the sidecar's plausibility limits).
func TestUnitGuards(t *testing.T) {
	sims := map[string]string{}
	for _, k := range []string{"t2", "t2star", "t1-ir", "t1-vfa"} {
		sims[k] = simulated(t, k, "--matrix", "24")
	}
	seconds := func(v []float64) []any {
		var o []any
		for _, x := range v {
			o = append(o, x*1000)
		}
		return o
	}
	cases := []struct {
		name, model string
		series      func() string
		args        []string
		want        string // in the one line of stderr
	}{
		{"t2 --te in s", "t2", func() string { return sims["t2"] }, []string{"--te", "0.01,0.02,0.03,0.04,0.05,0.06,0.07,0.08,0.09,0.1,0.11,0.12,0.13,0.14,0.15,0.16"}, "tauvox takes echo times in ms"},
		{"t2star --te in s", "t2star", func() string { return sims["t2star"] }, []string{"--te", "0.003,0.006,0.009,0.012,0.015,0.018,0.021,0.024,0.027,0.03,0.033,0.036"}, "was --te 3,6,9,…,36 (ms) meant?"},
		{"t1-ir --ti in s", "t1-ir", func() string { return sims["t1-ir"] }, []string{"--ti", "0.05,0.1,0.2,0.4,0.7,1.1,1.8,3.2"}, "tauvox takes inversion times in ms"},
		{"t1-vfa --tr in s", "t1-vfa", func() string { return sims["t1-vfa"] }, []string{"--tr", "0.015"}, "tauvox takes repetition times in ms"},
		{"t1-vfa --fa in rad", "t1-vfa", func() string { return sims["t1-vfa"] }, []string{"--fa", "0.0349,0.0873,0.1745,0.2618,0.3491,0.5236"}, "tauvox takes flip angles in degrees and these look like radians: was --fa 2,5,10,15,20,30 meant?"},
		{"t1-vfa --fa above 180", "t1-vfa", func() string { return sims["t1-vfa"] }, []string{"--fa", "270"}, "270° is above 180°"},
		{"t2 sidecar TE in ms", "t2", func() string {
			return withSidecar(t, sims["t2"], func(s map[string]any) {
				s["EchoTime"] = seconds([]float64{0.01, 0.02, 0.03, 0.04, 0.05, 0.06, 0.07, 0.08, 0.09, 0.1, 0.11, 0.12, 0.13, 0.14, 0.15, 0.16})
			})
		}, nil, "EchoTime: 10 s is implausibly long (above 1 s); sidecar times are in seconds (BIDS): was 10 ms (0.01 s) meant?"},
		{"t2star sidecar TE in ms", "t2star", func() string {
			return withSidecar(t, sims["t2star"], func(s map[string]any) { s["EchoTime"] = []any{3, 6, 9, 12, 15, 18, 21, 24, 27, 30, 33, 36} })
		}, nil, "EchoTime: 3 s is implausibly long"},
		{"vfa sidecar FA in rad", "t1-vfa", func() string {
			return withSidecar(t, sims["t1-vfa"], func(s map[string]any) { s["FlipAngle"] = []any{0.0349, 0.0873, 0.1745, 0.2618, 0.3491, 0.5236} })
		}, nil, "look like radians; sidecar flip angles are in degrees (BIDS)"},
		{"vfa sidecar TR in ms", "t1-vfa", func() string {
			return withSidecar(t, sims["t1-vfa"], func(s map[string]any) { s["RepetitionTime"] = 15 })
		}, nil, "repetition time 15000 ms of volume 1 is implausible for t1-vfa, a spoiled gradient echo (TR of a few to about 100 ms; refused above 1000 ms): was 15 ms meant"},
		{"vfa sidecar FA above 180", "t1-vfa", func() string {
			return withSidecar(t, sims["t1-vfa"], func(s map[string]any) { s["FlipAngle"] = []any{2, 5, 10, 15, 20, 300} })
		}, nil, "FlipAngle: 300 degrees is outside (0, 180]"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "maps")
			args := append([]string{"fit", c.series(), "--model", c.model, "--out", out, "--no-preview"}, c.args...)
			code, _, stderr := tauvox(t, args...)
			if code != 2 || !strings.Contains(stderr, c.want) || strings.Count(strings.TrimSpace(stderr), "\n") != 0 {
				t.Errorf("exit %d, stderr %q; want 2 and one line containing %q", code, stderr, c.want)
			}
			if _, err := os.Stat(out); !os.IsNotExist(err) {
				t.Errorf("%s written after a refusal", out)
			}
		})
	}

	// The right units: the same values the sidecar holds (no notice), then
	// different ones (a notice naming both); the protocol recorded is the
	// one given.
	ok := []struct {
		model string
		args  []string
		note  string
		te    float64 // first echo time recorded, ms (0: not checked)
	}{
		{"t2", []string{"--te", "10,20,30,40,50,60,70,80,90,100,110,120,130,140,150,160"}, "", 10},
		{"t2", []string{"--te", "11,22,33,44,55,66,77,88,99,110,121,132,143,154,165,176"}, "--te 11,22,33,…,176 ms replaces the EchoTime of the sidecar t2.json (10,20,30,…,160 ms)", 11},
		{"t2star", []string{"--te", "3,6,9,12,15,18,21,24,27,30,33,36"}, "", 3},
		{"t1-vfa", []string{"--fa", "2,5,10,15,20,30", "--tr", "15"}, "", 0},
		{"t1-vfa", []string{"--fa", "3,6,11,16,21,31", "--tr", "15"}, "--fa 3,6,11,16,21,31° replaces the FlipAngle of the sidecar t1-vfa.json (2,5,10,15,20,30°)", 0},
	}
	for _, c := range ok {
		out := filepath.Join(t.TempDir(), "maps")
		args := append([]string{"fit", sims[c.model], "--model", c.model, "--out", out, "--no-preview"}, c.args...)
		code, _, stderr := tauvox(t, args...)
		if code != 0 {
			t.Errorf("%v: exit %d: %s", c.args, code, stderr)
			continue
		}
		if c.note == "" && strings.Contains(stderr, "replaces") || c.note != "" && !strings.Contains(stderr, "tauvox: note: "+c.note) {
			t.Errorf("%v: stderr %q, want note %q", c.args, stderr, c.note)
		}
		if c.te > 0 {
			var prov struct {
				Protocol []struct {
					TE *float64 `json:"te_ms"`
				} `json:"protocol"`
			}
			b, _ := os.ReadFile(filepath.Join(out, "provenance.json"))
			if err := json.Unmarshal(b, &prov); err != nil || prov.Protocol[0].TE == nil || *prov.Protocol[0].TE != c.te {
				t.Errorf("%v: provenance protocol %s", c.args, b)
			}
		}
	}
}
