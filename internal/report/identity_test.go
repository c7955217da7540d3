package report

import (
	"html"
	"strings"
	"testing"

	"github.com/tauvox/tauvox/roi/phantom"
)

// TestIdentityPanel: the report shows how the vials were told apart — the
// status, the margin, and per vial the reference against the medians
// measured where the chosen placement and the runner-up put it — and an
// undetermined session shows its reason, its fix and undetermined verdicts
// without deviations. Vial ids from a file stay escaped in the panel.
func TestIdentityPanel(t *testing.T) {
	p := testPage(true)
	f := func(v float64) *float64 { return &v }
	p.QA.Identity = &phantom.Identity{Status: phantom.IdentityFound, Measure: phantom.MatchMeasure, Threshold: 4,
		Groups: []phantom.IdentityGroup{{Quantities: []string{"T1", "T2"}, Status: phantom.IdentityFound, Symmetries: 18, Placements: 19,
			Residual: 0.41, Chosen: phantom.Choice{Rotation: 12.5, Cost: 0.012}, RunnerUp: &phantom.Choice{Rotation: 52.5, Mirrored: true, Cost: 0.31},
			Margin: f(0.298), Scale: 0.015, Z: f(44.4), Moved: 36, Vials: 10,
			Evidence: []phantom.Evidence{
				{ID: vialID(2, true), Quantity: "T1", Reference: 280, Chosen: f(284.2), RunnerUp: f(551.0)},
				{ID: "A1", Quantity: "T2", Reference: 20, Chosen: f(20.6), RunnerUp: nil},
			}}}}
	_, b := writeTest(t, p)
	wellFormed(t, b)
	s := string(b)
	if !strings.Contains(s, `&#34;&gt;&lt;img src=x onerror=console.log(&#34;tauvox-injected&#34;)&gt;`) {
		t.Error("hostile vial id not escaped in the identity panel")
	}
	text := html.UnescapeString(s)
	for _, want := range []string{`id="identity"`, "Identity: found", "T1 + T2: found", "19 (18 allowed by the layout", "turned 12.5°, face up; cost 0.0120",
		"turned 52.5°, face down; cost 0.3100", "0.2980", "44.4", "284.2", "+1.5 %", "551.0", "+96.8 %", "+3.0 %"} {
		if !strings.Contains(text, want) {
			t.Errorf("identity panel lacks %q", want)
		}
	}
	if strings.Contains(s, "identity-undetermined\"") {
		t.Error("found identity styled as undetermined")
	}

	// Undetermined: every vial undetermined, the reason and the fix shown.
	p = testPage(false)
	for i := range p.QA.Vials {
		if p.QA.Vials[i].Verdict != phantom.NotMeasured {
			p.QA.Vials[i].Verdict, p.QA.Vials[i].Note = phantom.Undetermined, "identity undetermined"
		}
	}
	p.QA.Verdict = phantom.Overall(p.QA.Vials)
	p.QA.Identity = &phantom.Identity{Status: phantom.IdentityUndetermined, Reason: "two placements match the references about equally",
		Fix: "give the phantom's rotation and face", Measure: phantom.MatchMeasure, Threshold: 4,
		Groups: []phantom.IdentityGroup{{Quantities: []string{"T2"}, Status: phantom.IdentityUndetermined, Z: f(0.3)}}}
	_, b = writeTest(t, p)
	s = html.UnescapeString(string(b))
	for _, want := range []string{`class="verdict undetermined"`, "UNDETERMINED", "19 undetermined", "identity-undetermined",
		"two placements match the references about equally", "To settle it: give the phantom's rotation and face", `class="v-undetermined"`} {
		if !strings.Contains(s, want) {
			t.Errorf("undetermined page lacks %q", want)
		}
	}
	if strings.Contains(s, "%</td><td class=\"num\">± ") {
		t.Error("an undetermined vial shows a deviation")
	}
}
