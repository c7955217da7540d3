package qa

import (
	"bytes"
	"encoding/json"
	"math"
	"strconv"
)

// nullFloat is a float64 that JSON carries as null when it is NaN or
// infinite (JSON has no NaN): an unmeasured vial's median, a deviation
// without reference. null decodes back to NaN, never to a silent 0.
type nullFloat float64

func (f nullFloat) MarshalJSON() ([]byte, error) {
	v := float64(f)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, v, 'g', -1, 64), nil
}

func (f *nullFloat) UnmarshalJSON(b []byte) error {
	if bytes.Equal(bytes.TrimSpace(b), []byte("null")) {
		*f = nullFloat(math.NaN())
		return nil
	}
	var v float64
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	*f = nullFloat(v)
	return nil
}

// vialJSON is VialQA with its measured and derived numbers as nullFloat;
// the fields shadow those of the embedded plain copy (encoding/json
// takes the shallower field).
type vialJSON struct {
	vialPlain
	Mean      nullFloat    `json:"mean_ms"`
	Median    nullFloat    `json:"median_ms"`
	SD        nullFloat    `json:"sd_ms"`
	Failed    nullFloat    `json:"failed_fraction"`
	Reference nullFloat    `json:"reference_ms"`
	RefUncPct nullFloat    `json:"reference_uncertainty_pct"`
	Deviation nullFloat    `json:"deviation_pct"`
	Tolerance nullFloat    `json:"tolerance_ms"`
	CenterMM  [3]nullFloat `json:"center_mm"`
	RadiusMM  nullFloat    `json:"roi_radius_mm"`
}

type vialPlain VialQA

// MarshalJSON writes r with NaN and infinite numbers as null.
func (r VialQA) MarshalJSON() ([]byte, error) {
	j := vialJSON{vialPlain: vialPlain(r), Mean: nullFloat(r.Mean), Median: nullFloat(r.Median), SD: nullFloat(r.SD),
		Failed: nullFloat(r.Failed), Reference: nullFloat(r.Reference), RefUncPct: nullFloat(r.RefUncPct),
		Deviation: nullFloat(r.Deviation), Tolerance: nullFloat(r.Tolerance), RadiusMM: nullFloat(r.RadiusMM)}
	for k, v := range r.CenterMM {
		j.CenterMM[k] = nullFloat(v)
	}
	return json.Marshal(j)
}

// UnmarshalJSON reads r, turning null numbers into NaN.
func (r *VialQA) UnmarshalJSON(b []byte) error {
	// An absent number is undefined too (NaN), never a silent 0: a
	// qa.json without a vial's median must not record a median of 0 ms.
	nan := nullFloat(math.NaN())
	j := vialJSON{Mean: nan, Median: nan, SD: nan, Failed: nan, Reference: nan, RefUncPct: nan, Deviation: nan, Tolerance: nan, RadiusMM: nan}
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*r = VialQA(j.vialPlain)
	r.Mean, r.Median, r.SD, r.Failed = float64(j.Mean), float64(j.Median), float64(j.SD), float64(j.Failed)
	r.Reference, r.RefUncPct, r.Deviation, r.Tolerance = float64(j.Reference), float64(j.RefUncPct), float64(j.Deviation), float64(j.Tolerance)
	r.RadiusMM = float64(j.RadiusMM)
	for k, v := range j.CenterMM {
		r.CenterMM[k] = float64(v)
	}
	return nil
}

type locJSON struct {
	locPlain
	Center     [3]nullFloat `json:"center_mm"`
	Rotation   nullFloat    `json:"rotation_deg"`
	Confidence nullFloat    `json:"confidence"`
	Residual   nullFloat    `json:"residual_mm"`
}

type locPlain Localisation

// MarshalJSON writes l with NaN and infinite numbers as null.
func (l Localisation) MarshalJSON() ([]byte, error) {
	j := locJSON{locPlain: locPlain(l), Rotation: nullFloat(l.Rotation), Confidence: nullFloat(l.Confidence), Residual: nullFloat(l.Residual)}
	for k, v := range l.Center {
		j.Center[k] = nullFloat(v)
	}
	return json.Marshal(j)
}

// UnmarshalJSON reads l, turning null numbers into NaN.
func (l *Localisation) UnmarshalJSON(b []byte) error {
	var j locJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return err
	}
	*l = Localisation(j.locPlain)
	l.Rotation, l.Confidence, l.Residual = float64(j.Rotation), float64(j.Confidence), float64(j.Residual)
	for k, v := range j.Center {
		l.Center[k] = float64(v)
	}
	return nil
}
