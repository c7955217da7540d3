package phantom

import (
	"fmt"
	"math"
)

// QAFormat is the format tag of qa.json.
const QAFormat = "tauvox-qa/1"

// Verdicts of a vial and of a session.
const (
	Pass        = "pass"
	Fail        = "fail"
	NotMeasured = "not-measured"
)

// QA is the content of qa.json: one phantom session.
type QA struct {
	Format  string      `json:"format"`
	Tool    Tool        `json:"tool"`
	Session Session     `json:"session"`
	Series  []SeriesRef `json:"series"`
	Vials   []VialQA    `json:"vials"`
	Verdict string      `json:"verdict"` // pass, fail, undetermined, or not-measured when nothing was measured
	// Identity says how the vials were told apart (absent in files from
	// before it was recorded).
	Identity *Identity `json:"identity,omitempty"`
	Caution  string    `json:"caution"`
}

// Tool names the program that made the file.
type Tool struct {
	Name    string `json:"name"`
	Version string `json:"version"`
}

// Session identifies a QA session. It holds no patient identifiers.
type Session struct {
	Scanner      string  `json:"scanner"`
	Date         string  `json:"date"` // YYYY-MM-DD
	Time         string  `json:"time"` // HH:MM (may be empty)
	Field        float64 `json:"field_T"`
	Temperature  float64 `json:"temperature_C"`
	Phantom      string  `json:"phantom"`
	Extrapolated bool    `json:"extrapolated,omitempty"` // a reference was extrapolated beyond its table
}

// SeriesRef describes one measured map and how it was made.
type SeriesRef struct {
	Quantity string `json:"quantity"` // T1, T2
	Map      string `json:"map"`      // path of the map read
	// Description is the description of the fitted series as its
	// provenance gives it (text from the scanner: escape before showing).
	Description  string       `json:"description,omitempty"`
	Model        string       `json:"model,omitempty"`
	Method       string       `json:"method,omitempty"`
	Protocol     []Protocol   `json:"protocol,omitempty"`
	Inputs       []FileRef    `json:"inputs,omitempty"`
	Localisation Localisation `json:"localisation"`
}

// Protocol is one volume's acquisition parameters (ms, degrees; nil when
// unknown).
type Protocol struct {
	TE *float64 `json:"te_ms"`
	TI *float64 `json:"ti_ms"`
	TR *float64 `json:"tr_ms"`
	FA *float64 `json:"flip_deg"`
}

// FileRef is a file that went into a map, with its checksum.
type FileRef struct {
	Path   string `json:"path"`
	Role   string `json:"role,omitempty"`
	SHA256 string `json:"sha256,omitempty"`
}

// Localisation is where the phantom was found (or placed) in a map.
type Localisation struct {
	Center     [3]float64 `json:"center_mm"`    // scanner RAS
	Rotation   float64    `json:"rotation_deg"` // counter-clockwise in the slice plane
	Mirrored   bool       `json:"mirrored"`
	Slice      int        `json:"slice"` // 0-based slice index of the grid
	Confidence float64    `json:"confidence"`
	Method     string     `json:"method"` // "found", "given" or "mixed"
	// Residual is the RMS distance (mm) between the vial centres found in
	// the image and those predicted by the fitted placement.
	Residual float64 `json:"residual_mm"`
	// SpherePlane is the fractional slice index of the spheres' plane
	// found from the images (absent without spheres or with one slice).
	SpherePlane *float64 `json:"sphere_plane_slice,omitempty"`
}

// VialQA is the result of one vial for one quantity.
type VialQA struct {
	ID        string     `json:"id"`
	Quantity  string     `json:"quantity"`
	N         int        `json:"n"`
	Mean      float64    `json:"mean_ms"`
	Median    float64    `json:"median_ms"`
	SD        float64    `json:"sd_ms"`
	Failed    float64    `json:"failed_fraction"`
	Reference float64    `json:"reference_ms"`              // at the session temperature and field; 0 when none
	RefUncPct float64    `json:"reference_uncertainty_pct"` //
	Deviation float64    `json:"deviation_pct"`             // 100·(median − reference)/reference
	Tolerance float64    `json:"tolerance_ms"`              // max(pct·reference, abs)
	Verdict   string     `json:"verdict"`
	Note      string     `json:"note,omitempty"`
	CenterMM  [3]float64 `json:"center_mm"` // where the region was placed (RAS)
	RadiusMM  float64    `json:"roi_radius_mm"`
}

// Judge fills the reference, deviation, tolerance and verdict of r from
// the definition's vial v at the session's field and temperature. The
// measured value compared is the median (robust to a few edge voxels,
// common practice in phantom QA [check-values §4.2: report mean, median
// and SD]). A vial passes when |median − reference| ≤ max(pct % of
// reference, abs_ms) (the tolerance convention of the phantom definition,
// design.md; common practice). A vial without a reference row at the
// session's field, without a tolerance for the quantity, or without a
// usable measurement (fewer than minN finite voxels) is not measured.
func Judge(r *VialQA, v *Vial, tol map[string]Tolerance, field, temp float64, extrapolate bool, minN int) error {
	r.Verdict = NotMeasured
	ref, unc, ok, err := v.ReferenceAt(r.Quantity, field, temp, extrapolate)
	if err != nil {
		return err
	}
	if !ok {
		r.Note = fmt.Sprintf("no %s reference at %g T", r.Quantity, field)
		return nil
	}
	r.Reference, r.RefUncPct = ref, unc
	t, ok := tol[r.Quantity]
	if !ok {
		r.Note = "no tolerance for " + r.Quantity
		return nil
	}
	r.Tolerance = math.Max(t.Pct/100*ref, t.Abs)
	if r.N < minN || math.IsNaN(r.Median) {
		if r.Note == "" {
			r.Note = fmt.Sprintf("%d usable voxels", r.N)
		}
		return nil
	}
	r.Deviation = 100 * (r.Median - ref) / ref
	if math.Abs(r.Median-ref) <= r.Tolerance {
		r.Verdict = Pass
	} else {
		r.Verdict = Fail
	}
	return nil
}

// Overall returns the session verdict: fail when any vial fails,
// undetermined when none failed but some vial's identity is undetermined,
// pass when at least one passed and none failed or is undetermined,
// not-measured otherwise.
func Overall(vials []VialQA) string {
	v := NotMeasured
	und := false
	for _, r := range vials {
		switch r.Verdict {
		case Fail:
			return Fail
		case Pass:
			v = Pass
		case Undetermined:
			und = true
		}
	}
	if und {
		return Undetermined
	}
	return v
}
