package fit

import (
	"strings"
	"testing"
)

// TestRegistry: every listed model is made by New with each of its
// methods, reports the same name and method, and has help text; misplaced
// options are refused.
func TestRegistry(t *testing.T) {
	for _, info := range Models() {
		if len(strings.Split(strings.TrimSpace(info.Help), "\n")) < 3 || !strings.Contains(info.Help, "Outputs:") {
			t.Errorf("%s: help text too short or without outputs:\n%s", info.Name, info.Help)
		}
		for _, meth := range info.Methods {
			m, err := New(Spec{Model: info.Name, Method: meth})
			if err != nil {
				t.Errorf("%s/%s: %v", info.Name, meth, err)
				continue
			}
			if m.Name() != info.Name || m.Method() != meth {
				t.Errorf("%s/%s: model reports %s/%s", info.Name, meth, m.Name(), m.Method())
			}
		}
	}
	for _, c := range []struct {
		s    Spec
		want string
	}{
		{Spec{Model: "t2-epg", Method: "loglinear"}, "no method"},
		{Spec{Model: "t1-ir", Sigma: 1}, "--sigma"},
		{Spec{Model: "t2", T1Fixed: 800}, "fixed T1"},
		{Spec{Model: "t2-spectrum", RefocusAngle: 150}, "refocusing angle"},
		{Spec{Model: "t2-epg", EPGBasis: true}, "EPG basis"},
		{Spec{Model: "t2", Window: 30}, "window"},
		{Spec{Model: "t2-mystery"}, "unknown model"},
	} {
		if _, err := New(c.s); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%+v: error %v, want %q", c.s, err, c.want)
		}
	}
	if m, err := New(Spec{Model: "t2-epg", Sigma: 2, T1Fixed: 800, RefocusAngle: 160}); err != nil || m.(*StimulatedEcho).T1 != 800 || m.(*StimulatedEcho).RefocusAngle != 160 {
		t.Errorf("t2-epg spec: %v %+v", err, m)
	}
	if m, err := New(Spec{Model: "t2-spectrum", Window: 30, EPGBasis: true}); err != nil || !m.(*Spectrum).EPGBasis || m.(*Spectrum).Window != 30 {
		t.Errorf("t2-spectrum spec: %v %+v", err, m)
	}
}

// TestSuggest: scan's suggestion for each varying parameter comes from the
// registry (the model marked Suggest that needs it, the echo kind telling
// t2 from t2star).
func TestSuggest(t *testing.T) {
	for _, c := range []struct {
		needs string
		seq   Sequence
		want  string
	}{
		{"EchoTime", SeqSpinEcho, "t2"}, {"EchoTime", SeqGradientEcho, "t2star"},
		{"InversionTime", SeqSpinEcho, "t1-ir"}, {"FlipAngle", SeqSpinEcho, "t1-vfa"},
		{"RepetitionTime", SeqSpinEcho, "t1-sr"}, {"EchoNumber", SeqSpinEcho, ""},
	} {
		if got := Suggest(c.needs, c.seq); got != c.want {
			t.Errorf("Suggest(%s, %d) = %q, want %q", c.needs, c.seq, got, c.want)
		}
	}
	for _, m := range Models() {
		if _, ok := map[string]bool{"EchoTime": true, "InversionTime": true, "FlipAngle": true, "RepetitionTime": true}[m.Needs]; !ok {
			t.Errorf("%s needs %q, not an Acquisition field scan knows", m.Name, m.Needs)
		}
	}
}
