package phantom

import (
	"math"
	"strings"
	"testing"
)

// FuzzParse feeds arbitrary JSON to the phantom-definition parser, seeded
// with the built-in demo definition (demo.json) and small broken ones
// (style.md). It must not panic; errors are one line starting with the
// name; for an accepted definition the reference lookup at a range of
// fields and temperatures must not panic and gives a finite positive
// value or an error.
func FuzzParse(f *testing.F) {
	f.Add(DemoJSON())
	for _, s := range []string{
		`{"format":"tauvox-phantom/1","name":"x","vials":[{"id":"a","x_mm":0,"y_mm":0,"radius_mm":5,"reference":{"T1":[{"field_T":1.5,"temperature_C":20,"value_ms":100}]}}],"tolerance":{"T1":{"pct":5}}}`,
		`{"format":"tauvox-phantom/1","name":"x","vials":[{"id":"a","x_mm":0,"y_mm":0,"radius_mm":5}],"tolerance":{}}`,
		`{"format":"tauvox-phantom/0"}`,
		`{"format":"tauvox-phantom/1","name":"x","vials":[{"id":"a","x_mm":0,"y_mm":0,"radius_mm":5,"reference":{"T2":[{"field_T":3,"temperature_C":18,"value_ms":50},{"field_T":3,"temperature_C":18,"value_ms":60},{"field_T":3.05,"temperature_C":22,"value_ms":55}]}}]}`,
		`{"format":"tauvox-phantom/1","name":"<b>x</b>","vials":[{"id":"../../a","x_mm":1e308,"y_mm":-1e308,"radius_mm":1e-308,"reference":{"T1":[{"field_T":1.5,"temperature_C":20,"value_ms":1e308}]}}]}`,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		d, err := Parse(data, "fuzz.json")
		if err != nil {
			if m := err.Error(); !strings.HasPrefix(m, "fuzz.json: ") || strings.ContainsAny(m, "\r\n") {
				t.Fatalf("bad error text %q", m)
			}
			return
		}
		if len(d.Vials) == 0 {
			t.Fatal("accepted a definition without vials")
		}
		for i := range d.Vials {
			v := &d.Vials[i]
			for q := range v.Reference {
				for _, field := range []float64{1.5, 3} {
					for _, temp := range []float64{-300, 0, 20, 21.7, 1e300, math.NaN()} {
						for _, ex := range []bool{false, true} {
							val, _, ok, err := v.ReferenceAt(q, field, temp, ex)
							if err != nil {
								if strings.ContainsAny(err.Error(), "\r\n") {
									t.Fatalf("bad error text %q", err)
								}
								continue
							}
							if ok && !ex && (math.IsNaN(val) || math.IsInf(val, 0)) {
								t.Fatalf("vial %s %s at %g T %g °C: reference %g", v.ID, q, field, temp, val)
							}
						}
					}
				}
			}
		}
	})
}
