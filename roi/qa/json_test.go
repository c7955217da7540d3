package qa

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
)

// TestQAJSONNaN: a session with an unmeasured vial (NaN median, mean, SD
// and deviation) and a failed localisation (NaN confidence) encodes, with
// null for each NaN (JSON has no NaN: RFC 8259 §6), and decodes back to
// NaN, not 0. Before, json.Marshal failed on the NaN and the phantom
// command wrote a qa.json holding only a newline.
func TestQAJSONNaN(t *testing.T) {
	nan := math.NaN()
	qa := QA{Format: QAFormat, Session: Session{Scanner: "S", Date: "2026-05-01", Field: 1.5, Temperature: 20, Phantom: "p"},
		Series: []SeriesRef{{Quantity: "T2", Localisation: Localisation{Center: [3]float64{1, nan, 3}, Confidence: nan, Residual: math.Inf(1)}}},
		Vials: []VialQA{
			{ID: "A", Quantity: "T2", N: 0, Mean: nan, Median: nan, SD: nan, Reference: 50, Deviation: nan, Tolerance: 5, Verdict: NotMeasured, CenterMM: [3]float64{1, 2, 3}, RadiusMM: 4},
			{ID: "B", Quantity: "T2", N: 9, Mean: 51, Median: 50.5, SD: 1, Reference: 50, Deviation: 1, Tolerance: 5, Verdict: Pass},
		}}
	b, err := json.Marshal(qa)
	if err != nil {
		t.Fatal(err)
	}
	for _, w := range []string{`"median_ms":null`, `"deviation_pct":null`, `"confidence":null`, `"residual_mm":null`, `"center_mm":[1,null,3]`, `"median_ms":50.5`, `"id":"A"`} {
		if !strings.Contains(string(b), w) {
			t.Errorf("encoding lacks %s: %s", w, b)
		}
	}
	var back QA
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	a, v := back.Vials[0], back.Vials[1]
	if !math.IsNaN(a.Median) || !math.IsNaN(a.Mean) || !math.IsNaN(a.Deviation) || a.Reference != 50 || a.ID != "A" || a.Verdict != NotMeasured || a.CenterMM != [3]float64{1, 2, 3} {
		t.Errorf("vial A back: %+v", a)
	}
	if v.Median != 50.5 || v.N != 9 || v.Deviation != 1 {
		t.Errorf("vial B back: %+v", v)
	}
	l := back.Series[0].Localisation
	if !math.IsNaN(l.Confidence) || !math.IsNaN(l.Residual) || !math.IsNaN(l.Center[1]) || l.Center[2] != 3 {
		t.Errorf("localisation back: %+v", l)
	}
}
