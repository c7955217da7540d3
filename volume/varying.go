package volume

import (
	"math"
	"sort"
)

// Varied is an acquisition parameter that takes more than one value over
// the volumes of a series: its Acquisition field name and its distinct
// values, ascending.
type Varied struct {
	Name   string // "InversionTime", "FlipAngle", "EchoTime" or "RepetitionTime"
	Values []float64
}

// Varying returns the parameters that vary over acq, the most telling
// first: InversionTime, FlipAngle, EchoTime, RepetitionTime (an inversion
// series may vary TR as well, a variable-flip-angle series TE; the first
// is what the series measures). Values within 1e-4 (ms or degrees) of each
// other count as one; unknown values (NaN) are left out. It is the one rule
// of tauvox scan for DICOM and NIfTI series alike.
func Varying(acq []Acquisition) []Varied {
	var out []Varied
	for _, p := range []struct {
		name string
		get  func(Acquisition) float64
	}{
		{"InversionTime", func(a Acquisition) float64 { return a.InversionTime }},
		{"FlipAngle", func(a Acquisition) float64 { return a.FlipAngle }},
		{"EchoTime", func(a Acquisition) float64 { return a.EchoTime }},
		{"RepetitionTime", func(a Acquisition) float64 { return a.RepetitionTime }},
	} {
		seen := map[int64]bool{}
		var vals []float64
		for _, a := range acq {
			v := p.get(a)
			if math.IsNaN(v) || math.IsInf(v, 0) {
				continue
			}
			if k := int64(math.Round(v * 1e4)); !seen[k] {
				seen[k] = true
				vals = append(vals, v)
			}
		}
		if len(vals) > 1 {
			sort.Float64s(vals)
			out = append(out, Varied{p.name, vals})
		}
	}
	return out
}
