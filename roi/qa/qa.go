package qa

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

// Identity statuses (qa.json "identity"."status").
const (
	IdentityFound        = "found"        // the values chose one placement by a clear margin
	IdentityGiven        = "given"        // the user fixed the rotation and the face
	IdentityUndetermined = "undetermined" // the vials could not be told apart
)

// Undetermined is the verdict of a vial whose identity is not known with
// confidence: no pass or fail is given.
const Undetermined = "undetermined"

// Identity reports how the vials were told apart in a session.
type Identity struct {
	Status string `json:"status"` // found, given or undetermined
	// Reason says in one line why the identity is undetermined or how it
	// was fixed; Fix how the user can settle an undetermined one.
	Reason    string          `json:"reason,omitempty"`
	Fix       string          `json:"fix,omitempty"`
	Measure   string          `json:"measure"`
	Threshold float64         `json:"threshold"`
	Groups    []IdentityGroup `json:"groups"`
}

// IdentityGroup is the identity of the maps that share one grid.
type IdentityGroup struct {
	Quantities []string `json:"quantities"`
	Status     string   `json:"status"`
	Reason     string   `json:"reason,omitempty"`
	// Symmetries is the number of placements the layout allows (its
	// symmetries); Placements the number evaluated (with other geometric
	// candidates of nearly the best contrast).
	Symmetries int     `json:"symmetries"`
	Placements int     `json:"placements"`
	Residual   float64 `json:"residual_mm"` // geometric fit of the chosen placement
	Chosen     Choice  `json:"chosen"`
	RunnerUp   *Choice `json:"runner_up,omitempty"`
	// Margin is RunnerUp.Cost − Chosen.Cost; Scale the noise scale (log
	// units) from the chosen placement's spread of log-ratios; Z the
	// margin in units of Scale. nil when there is no runner-up.
	Margin *float64 `json:"margin,omitempty"`
	Scale  float64  `json:"noise_scale"`
	Z      *float64 `json:"margin_z,omitempty"`
	// Moved is the number of vial-quantity terms the runner-up measures
	// elsewhere than the chosen placement.
	Moved    int        `json:"moved_terms,omitempty"`
	Vials    int        `json:"vials_measured"`
	Evidence []Evidence `json:"evidence"`
}

// Choice is one candidate placement and its match cost.
type Choice struct {
	Rotation float64 `json:"rotation_deg"`
	Mirrored bool    `json:"mirrored"`
	Cost     float64 `json:"cost"`
}

// Evidence is one vial's reference and the median measured where the
// chosen placement and the runner-up put it (nil when not measured).
type Evidence struct {
	ID        string   `json:"id"`
	Quantity  string   `json:"quantity"`
	Reference float64  `json:"reference_ms"`
	Chosen    *float64 `json:"chosen_ms"`
	RunnerUp  *float64 `json:"runner_up_ms,omitempty"`
}
