package report

import (
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/roi/phantom"
)

// Page is the content of one report.
type Page struct {
	// QA is the session result (qa.json). It is required.
	QA *phantom.QA
	// Views are the measured maps to show, normally one per quantity.
	// A quantity without a view gets its plots and table rows but no
	// picture.
	Views []View
	// Tolerance is the phantom definition's acceptance limit per
	// quantity (phantom.Definition.Tolerance). It sets the tolerance band
	// of the measured-against-reference plots: reference ± max(Pct % of
	// reference, Abs) over the whole axis. When a quantity has no entry,
	// the band joins the vials' own tolerances (VialQA.Tolerance) in
	// order of reference, from the smallest reference to the largest.
	// Optional.
	Tolerance map[string]phantom.Tolerance
	// WarnFraction is the share of its tolerance beyond which a passing
	// vial is shown as warn; 0 means DefaultWarnFraction, a negative
	// value switches it off.
	WarnFraction float64
	// History holds, per vial and quantity (key HistoryKey(id, q)), why
	// the stability history flags it (for example "drift −5.0 %/yr"); a
	// passing vial with an entry is shown as warn. Optional.
	History map[string]string
}

// DefaultWarnFraction: a passing vial whose deviation uses more than 80 %
// of its tolerance is shown as warn — one more step of the usual
// session-to-session scatter (1–2 %, check-values §4.2) would take a vial
// with a 5 % tolerance out of it (a choice, common practice).
const DefaultWarnFraction = 0.8

// Warn is the report's verdict for a vial inside its tolerance that its
// history flags or whose deviation is beyond WarnFraction of the
// tolerance.
const Warn = "warn"

// HistoryKey is the key of Page.History for a vial and quantity.
func HistoryKey(id, quantity string) string { return id + "\x00" + quantity }

// View is one measured map: the slice the vials were measured on and the
// regions measured.
type View struct {
	// Quantity is the quantity shown, as in VialQA.Quantity ("T1", "T2").
	Quantity string
	// Unit is printed on the colour bar; empty means
	// preview.DefaultUnit(Quantity).
	Unit string
	// Values holds the slice, Nx·Ny samples with i varying fastest
	// (index i + Nx·j). NaN marks a failed or masked voxel.
	Values []float32
	Nx, Ny int
	// PixelMM is the in-plane voxel size (along i, along j) in mm, used
	// for the aspect ratio; zero or invalid means square pixels.
	PixelMM [2]float64
	// Slice is the 0-based slice index in the map's grid, for the
	// caption (normally SeriesRef.Localisation.Slice).
	Slice int
	// Window is the display window; the zero value means
	// preview.AutoRange of Values.
	Window preview.Window
	// Regions are the measured vial regions in this slice.
	Regions []Region
}

// Region is one measured vial region as a circle in a View's slice.
type Region struct {
	// ID is the vial id, drawn as the label.
	ID string
	// I, J are the centre in pixel (voxel index) coordinates of the
	// slice, 0-based, so pixel (i, j) covers I ∈ [i−½, i+½].
	I, J float64
	// Radius is the radius in pixels along i; with non-square pixels the
	// outline is drawn as a circle in millimetres.
	Radius float64
	// Verdict is phantom.Pass, phantom.Fail or phantom.NotMeasured; it
	// sets the outline's colour and style.
	Verdict string
}
