package pipeline

import (
	"strings"
	"testing"

	"github.com/tauvox/tauvox/fit"
)

// TestConfigCheck: contradictory settings are refused before anything is
// read, each with one line naming the option and the models that take it
// (from the registry).
func TestConfigCheck(t *testing.T) {
	for _, c := range []struct {
		c    Config
		want string
	}{
		{Config{Spec: fit.Spec{Model: "t2"}, B1: "b1.nii"}, "--b1 applies to t1-vfa, t2-epg only"},
		{Config{Spec: fit.Spec{Model: "t1-ir"}, Rician: true}, "--noise rician applies to t2, t2star, t2-epg only"},
		{Config{Spec: fit.Spec{Model: "t2", Sigma: 3}}, "--sigma needs --noise rician"},
		{Config{Spec: fit.Spec{Model: "t2", RefocusAngle: 150}}, "--refocus (the nominal refocusing angle) applies to t2-epg only"},
		{Config{Spec: fit.Spec{Model: "t1-vfa", Window: 30}}, "--window (the T2 window) applies to t2-spectrum only"},
		{Config{Spec: fit.Spec{Model: "t2-fancy"}}, `unknown model "t2-fancy"`},
		{Config{Spec: fit.Spec{Model: "t2"}, Workers: -1}, "--workers must be positive"},
	} {
		c.c.Out = "out"
		if err := c.c.check(); err == nil || err.Error() != c.want && !strings.HasPrefix(err.Error(), c.want) {
			t.Errorf("%+v: error %v, want %q", c.c.Spec, err, c.want)
		}
	}
	ok := Config{Spec: fit.Spec{Model: "t2-epg", RefocusAngle: 150, T1Fixed: 800}, B1: "b1.nii", Rician: true, Out: "out"}
	if err := ok.check(); err != nil {
		t.Errorf("t2-epg with --refocus, --t1, --b1, --noise rician: %v", err)
	}
}

// TestSettings: provenance records every option of the registry, the
// generic settings and the extras, whatever the model.
func TestSettings(t *testing.T) {
	c := &Config{Spec: fit.Spec{Model: "t2-epg", RefocusAngle: 150, T1Fixed: 800}, B1: "b1.nii", SkipEchoes: 1, Workers: 3,
		Rician: true, Extra: map[string]any{"suffix": "MESE"}}
	m, err := c.model(4)
	if err != nil {
		t.Fatal(err)
	}
	s := c.Settings(m, 4)
	want := map[string]any{"model": "t2-epg", "method": "nlls", "refocus_deg": 150.0, "t1_fixed_ms": 800.0, "b1": "b1.nii",
		"noise": "rician", "sigma": 4.0, "skip_echoes": 1, "workers": 3, "suffix": "MESE", "offset": false, "window_ms": 0.0,
		"epg_basis": false, "efficiency": false, "min_ms": 0.0, "max_ms": 0.0, "solver": "dedicated"}
	for k, v := range want {
		if s[k] != v {
			t.Errorf("settings[%s] = %v, want %v", k, s[k], v)
		}
	}
	for _, o := range fit.ModelOptions {
		if _, ok := s[o.Key]; !ok && o.Key != "sigma" {
			t.Errorf("option %s (key %s) not recorded", o.Flag, o.Key)
		}
	}
}
