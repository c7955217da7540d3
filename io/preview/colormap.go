package preview

import (
	"image/color"
	"strings"
)

// ColorMap is a colour table ordered from the colour of the lowest value
// (darkest) to that of the highest. The reserved invalid colour is not part
// of the table.
type ColorMap struct {
	// Name identifies the table, e.g. "viridis" or "viridis (reversed)".
	Name string
	// Colors holds the table entries, lowest value first. It must not be
	// empty when the map is used.
	Colors []color.RGBA
}

// The exported tables. Their data are matplotlib's (version
// MatplotlibVersion), exported by testdata/gen/colormaps.py; callers must
// not modify them.
var (
	// Plasma is matplotlib's perceptually uniform "plasma" table
	// (blue–magenta–orange–yellow).
	Plasma = ColorMap{Name: "plasma", Colors: plasmaTable[:]}
	// Viridis is matplotlib's perceptually uniform "viridis" table
	// (purple–blue–green–yellow).
	Viridis = ColorMap{Name: "viridis", Colors: viridisTable[:]}
	// Cividis is matplotlib's "cividis" table (blue–grey–yellow), made
	// perceptually uniform and readable with colour-vision deficiency
	// (Nuñez, Anderton & Renslow, PLoS ONE 2018;13:e0199239).
	Cividis = ColorMap{Name: "cividis", Colors: cividisTable[:]}
	// Gray is matplotlib's "gray" ramp sampled from 15 % to 100 %
	// intensity, so that its darkest entry (38,38,38) stays apart from
	// the reserved invalid colour black.
	Gray = ColorMap{Name: "gray", Colors: grayTable[:]}
)

// Scheme is the name of tauvox's pairing of colour tables with quantities
// (see ForQuantity).
const Scheme = "ember-lagoon"

// Black is the default reserved colour of invalid voxels (check-values.md
// §5: invalid shown black).
var Black = color.RGBA{0, 0, 0, 255}

// Reversed returns the table in the opposite order. It allocates a new
// table.
func (cm ColorMap) Reversed() ColorMap {
	n := len(cm.Colors)
	r := make([]color.RGBA, n)
	for i, c := range cm.Colors {
		r[n-1-i] = c
	}
	name := cm.Name + " (reversed)"
	if s, ok := strings.CutSuffix(cm.Name, " (reversed)"); ok {
		name = s
	}
	return ColorMap{Name: name, Colors: r}
}

// Darkest returns the colour of the lowest valid value.
func (cm ColorMap) Darkest() color.RGBA { return cm.Colors[0] }

// Brightest returns the colour of the highest valid value.
func (cm ColorMap) Brightest() color.RGBA { return cm.Colors[len(cm.Colors)-1] }

// ForQuantity returns the colour table for a quantity and whether the
// display must use it reversed (cm.Reversed()). The name is matched
// without regard to case, with an optional BIDS "map" suffix ("T2starmap")
// and "*" standing for "star":
//
//	T1, R1                      Plasma (R1 reversed)
//	T2, T2star, R2, R2star,
//	T1rho, R1rho                Viridis (rates reversed)
//	MWF, names containing
//	"fraction" or "frac"        Cividis
//	anything else (M0, B1, ...) Gray
//
// Why: longitudinal and transverse maps get clearly different tables so a
// reader never mistakes a T1 map for a T2 map, as the recommendation of
// check-values.md §5 does with two tables. Plasma runs through warm hues
// like the table recommended for T1, Viridis through blue–green hues like
// that recommended for T2; both are perceptually uniform and start at a
// dark but clearly coloured entry, so the reserved black stays unambiguous
// (magma and inferno start at near-black and were rejected for that).
// Fractions (0..1) get Cividis, uniform and colour-vision-deficiency safe,
// distinct from both relaxation tables; proton density, B1 and other maps
// look like anatomical images and get a grey ramp.
func ForQuantity(name string) (cm ColorMap, reversed bool) {
	q := strings.ToLower(strings.TrimSpace(name))
	q = strings.ReplaceAll(q, "*", "star")
	if s, ok := strings.CutSuffix(q, "map"); ok && s != "" {
		q = s
	}
	switch q {
	case "t1":
		return Plasma, false
	case "r1":
		return Plasma, true
	case "t2", "t2star", "t1rho":
		return Viridis, false
	case "r2", "r2star", "r1rho":
		return Viridis, true
	case "mwf":
		return Cividis, false
	}
	if strings.Contains(q, "frac") {
		return Cividis, false
	}
	return Gray, false
}

// DefaultUnit returns the unit tauvox uses for a quantity: "ms" for
// relaxation times, "1/s" for rates, "fraction" for fractions and "a.u."
// otherwise.
func DefaultUnit(name string) string {
	q := strings.ToLower(strings.TrimSpace(name))
	q = strings.ReplaceAll(q, "*", "star")
	if s, ok := strings.CutSuffix(q, "map"); ok && s != "" {
		q = s
	}
	switch q {
	case "t1", "t2", "t2star", "t1rho":
		return "ms"
	case "r1", "r2", "r2star", "r1rho":
		return "1/s"
	case "mwf":
		return "fraction"
	}
	if strings.Contains(q, "frac") {
		return "fraction"
	}
	return "a.u."
}
