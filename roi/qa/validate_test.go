package qa

import (
	"encoding/json"
	"strings"
	"testing"
)

// good is a valid session: a passing T1 vial and a not-measured T2 vial
// (nulls where nothing was measured).
const good = `{"format":"tauvox-qa/1","tool":{"name":"tauvox","version":"t"},
 "session":{"scanner":"MR-1","date":"2026-05-01","time":"09:30","field_T":1.5,"temperature_C":21,"phantom":"p"},
 "vials":[
  {"id":"A1","quantity":"T1","n":40,"mean_ms":1001,"median_ms":1000,"sd_ms":5,"failed_fraction":0,"reference_ms":990,"reference_uncertainty_pct":1,"deviation_pct":1.0101,"tolerance_ms":49.5,"verdict":"pass"},
  {"id":"A1","quantity":"T2","n":0,"mean_ms":null,"median_ms":null,"sd_ms":null,"failed_fraction":null,"reference_ms":100,"reference_uncertainty_pct":1,"deviation_pct":null,"tolerance_ms":10,"verdict":"not-measured"}],
 "verdict":"pass","caution":"c"}`

// edit returns good with the JSON value at key path replaced (or the key
// removed when v is nil).
func edit(t *testing.T, f func(m map[string]any)) *QA {
	t.Helper()
	var m map[string]any
	if err := json.Unmarshal([]byte(good), &m); err != nil {
		t.Fatal(err)
	}
	f(m)
	b, _ := json.Marshal(m)
	var q QA
	if err := json.Unmarshal(b, &q); err != nil {
		t.Fatal(err)
	}
	return &q
}

// TestValidate: the second bad-input catalogue's qa.json cases (n < 0, a
// time of 25:61, −300 °C, verdict "PASS!!", quantity "T3", a missing
// median or vial id, 1e308) and the other limits each give one line naming
// the field; the valid session passes.
func TestValidate(t *testing.T) {
	sess := func(m map[string]any) map[string]any { return m["session"].(map[string]any) }
	vial := func(m map[string]any, i int) map[string]any { return m["vials"].([]any)[i].(map[string]any) }
	many := func(m map[string]any) {
		v := vial(m, 1)
		var vs []any
		for i := 0; i <= MaxVials; i++ {
			c := map[string]any{}
			for k, x := range v {
				c[k] = x
			}
			c["id"] = "V" + strings.Repeat("x", i%7) + string(rune('a'+i%26)) + string(rune('a'+i/26%26)) + string(rune('a'+i/676))
			vs = append(vs, c)
		}
		m["vials"] = vs
	}
	for _, c := range []struct {
		name string
		f    func(m map[string]any)
		want string
	}{
		{"valid", func(map[string]any) {}, ""},
		{"n < 0", func(m map[string]any) { vial(m, 0)["n"] = -5 }, "vials[0] (A1 T1): n is -5, want ≥ 0"},
		{"time 25:61", func(m map[string]any) { sess(m)["time"] = "25:61" }, `session time "25:61" is not a time of day (HH:MM)`},
		{"−300 °C", func(m map[string]any) { sess(m)["temperature_C"] = -300 }, "session temperature_C -300 is outside -10…60 °C"},
		{"no field", func(m map[string]any) { delete(sess(m), "field_T") }, "session field_T 0 is outside (0, 25] T"},
		{"verdict PASS!!", func(m map[string]any) { vial(m, 0)["verdict"] = "PASS!!" }, `vials[0] (A1 T1): verdict "PASS!!" is not one of`},
		{"session verdict", func(m map[string]any) { m["verdict"] = "ok" }, `session verdict "ok" is not one of`},
		{"quantity T3", func(m map[string]any) { vial(m, 0)["quantity"] = "T3" }, `vials[0] (A1 T3): quantity "T3" is not one of T1, T2`},
		{"missing median", func(m map[string]any) { delete(vial(m, 0), "median_ms") }, "vials[0] (A1 T1): verdict pass without median_ms"},
		{"null median, judged", func(m map[string]any) { vial(m, 0)["median_ms"] = nil }, "verdict pass without median_ms"},
		{"missing id", func(m map[string]any) { delete(vial(m, 0), "id") }, "vials[0]: no vial id"},
		{"1e308", func(m map[string]any) { vial(m, 0)["median_ms"] = 1e308 }, "vials[0] (A1 T1): median_ms 1e+308 is outside [0, 100000]"},
		{"huge deviation", func(m map[string]any) { vial(m, 0)["deviation_pct"] = 5e4 }, "deviation_pct 50000 is outside [-10000, 10000]"},
		{"negative SD", func(m map[string]any) { vial(m, 0)["sd_ms"] = -1 }, "sd_ms -1 is outside"},
		{"failed fraction 2", func(m map[string]any) { vial(m, 0)["failed_fraction"] = 2 }, "failed_fraction 2 is outside [0, 1]"},
		{"zero reference, judged", func(m map[string]any) { vial(m, 0)["reference_ms"] = 0 }, "verdict pass with reference_ms 0, want > 0"},
		{"repeated vial", func(m map[string]any) { vial(m, 1)["quantity"] = "T1" }, "vials[1] (A1 T1) repeats vials[0]"},
		{"too many vials", many, "1001 vial results, above the limit of 1000 per session"},
		{"blank scanner", func(m map[string]any) { sess(m)["scanner"] = " " }, "session has no scanner"},
		{"date 2026-02-30", func(m map[string]any) { sess(m)["date"] = "2026-02-30" }, `session date "2026-02-30" is not a date`},
	} {
		err := Validate(edit(t, c.f))
		switch {
		case c.want == "" && err != nil:
			t.Errorf("%s: %v", c.name, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n")):
			t.Errorf("%s: %v, want %q", c.name, err, c.want)
		}
	}
}
