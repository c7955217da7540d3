package phantom

import (
	"bytes"
	_ "embed"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"

	"github.com/tauvox/tauvox/internal/regular"
)

// FormatV1 is the format tag of a phantom definition.
const FormatV1 = "tauvox-phantom/1"

// Definition describes a phantom: its vials, their reference values and
// the tolerance of each quantity.
type Definition struct {
	Format    string               `json:"format"`
	Name      string               `json:"name"`
	Vials     []Vial               `json:"vials"`
	Tolerance map[string]Tolerance `json:"tolerance"`
	// Body is optional: the phantom's outer shape and fill, used when
	// simulating it.
	Body *Body `json:"body,omitempty"`
}

// Vial is one vial of a phantom. X and Y place its centre in the phantom's
// own plane, in mm from the phantom's centre.
type Vial struct {
	ID        string           `json:"id"`
	X         float64          `json:"x_mm"`
	Y         float64          `json:"y_mm"`
	Radius    float64          `json:"radius_mm"`
	Reference map[string][]Row `json:"reference"`
	// PD is the relative proton density, used only when simulating
	// (default 1).
	PD float64 `json:"pd,omitempty"`
	// Shape is ShapeCylinder (the default when empty: a vial along the
	// phantom axis through every slice) or ShapeSphere (a ball of Radius
	// centred at Z).
	Shape string `json:"shape,omitempty"`
	// Z is the position of the vial centre along the phantom axis, mm from
	// the phantom's centre plane (default 0). It places spheres; a
	// cylinder runs along the axis and Z does not change its region.
	Z float64 `json:"z_mm,omitempty"`
}

// Vial shapes.
const (
	ShapeCylinder = "cylinder"
	ShapeSphere   = "sphere"
)

// IsSphere reports whether v is a sphere.
func (v *Vial) IsSphere() bool { return v.Shape == ShapeSphere }

// Row is one reference value of a vial: the value of a quantity at a field
// strength and temperature, with its relative uncertainty.
type Row struct {
	Field       float64 `json:"field_T"`
	Temperature float64 `json:"temperature_C"`
	Value       float64 `json:"value_ms"`
	Uncertainty float64 `json:"uncertainty_pct"`
}

// Tolerance is the acceptance limit of a quantity: a vial passes when
// |measured − reference| ≤ max(Pct % of reference, Abs).
type Tolerance struct {
	Pct float64 `json:"pct"`
	Abs float64 `json:"abs_ms"`
}

// Body is the outer cylinder of a phantom and its fill material.
type Body struct {
	Radius float64 `json:"radius_mm"`
	Length float64 `json:"length_mm"`
	FillT1 float64 `json:"fill_T1_ms"`
	FillT2 float64 `json:"fill_T2_ms"`
	FillPD float64 `json:"fill_pd"`
}

//go:embed demo.json
var demoJSON []byte

// Demo returns the built-in definition of the invented tauvox demo
// phantom. The values are invented for demonstration and are no real
// product's.
func Demo() *Definition {
	d, err := Parse(demoJSON, "demo.json")
	if err != nil {
		panic("phantom: built-in demo definition: " + err.Error())
	}
	return d
}

// DemoJSON returns the bytes of the built-in demo definition.
func DemoJSON() []byte { return append([]byte(nil), demoJSON...) }

// Read reads and checks a phantom definition file.
func Read(path string) (*Definition, error) {
	b, err := regular.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return Parse(b, path)
}

// Parse decodes and checks a phantom definition; name is used in errors.
func Parse(b []byte, name string) (*Definition, error) {
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	var d Definition
	if err := dec.Decode(&d); err != nil {
		return nil, fmt.Errorf("%s: phantom definition: %v", name, err)
	}
	if err := d.check(); err != nil {
		return nil, fmt.Errorf("%s: phantom definition: %v", name, err)
	}
	return &d, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func (d *Definition) check() error {
	if d.Format != FormatV1 {
		return fmt.Errorf("format %q, want %q", d.Format, FormatV1)
	}
	if len(d.Vials) == 0 {
		return errors.New("no vials")
	}
	if b := d.Body; b != nil {
		if !(b.Radius > 0) || !finite(b.Radius) || b.Length < 0 || !finite(b.Length) {
			return errors.New("body: radius_mm must be positive and length_mm not negative")
		}
	}
	seen := map[string]bool{}
	for i, v := range d.Vials {
		if strings.TrimSpace(v.ID) == "" {
			return fmt.Errorf("vial %d has no id", i+1)
		}
		if seen[v.ID] {
			return fmt.Errorf("vials[%d].id: vial id %q appears twice", i, v.ID)
		}
		seen[v.ID] = true
		if !finite(v.X) || !finite(v.Y) || !(v.Radius > 0) || !finite(v.Radius) {
			return fmt.Errorf("vial %s: position and a positive radius are required", v.ID)
		}
		switch v.Shape {
		case "", ShapeCylinder, ShapeSphere:
		default:
			return fmt.Errorf("vial %s: shape %q unknown (want %q or %q)", v.ID, v.Shape, ShapeCylinder, ShapeSphere)
		}
		if !finite(v.Z) {
			return fmt.Errorf("vial %s: z_mm must be a finite number", v.ID)
		}
		if b := d.Body; b != nil {
			// A vial must lie wholly inside the body (1e-6 mm slack for
			// values typed with rounding).
			if math.Hypot(v.X, v.Y)+v.Radius > b.Radius+1e-6 {
				return fmt.Errorf("vial %s: x_mm, y_mm and radius_mm place it outside the body (radius_mm %g)", v.ID, b.Radius)
			}
			if v.IsSphere() && b.Length > 0 && math.Abs(v.Z)+v.Radius > b.Length/2+1e-6 {
				return fmt.Errorf("vial %s: z_mm and radius_mm place it outside the body (length_mm %g)", v.ID, b.Length)
			}
		}
		if len(v.Reference) == 0 {
			return fmt.Errorf("vial %s has no reference values", v.ID)
		}
		for q, rows := range v.Reference {
			if len(rows) == 0 {
				return fmt.Errorf("vial %s: %s reference is empty", v.ID, q)
			}
			for _, r := range rows {
				if !(r.Value > 0) || !finite(r.Value) || !finite(r.Field) || !(r.Field > 0) || !finite(r.Temperature) || r.Uncertainty < 0 {
					return fmt.Errorf("vial %s: %s reference row needs field_T > 0, temperature_C and value_ms > 0", v.ID, q)
				}
			}
		}
	}
	for q, t := range d.Tolerance {
		if t.Pct < 0 || t.Abs < 0 || !finite(t.Pct) || !finite(t.Abs) {
			return fmt.Errorf("tolerance of %s must be non-negative", q)
		}
	}
	return nil
}

// ErrOutOfRange reports a temperature outside a vial's reference table.
var ErrOutOfRange = errors.New("temperature outside the reference table")

// ReferenceAt returns the reference value of quantity q ("T1", "T2") at
// the field strength closest to field (within 0.1 T) and temperature temp,
// interpolated linearly between the two nearest temperatures, and its
// relative uncertainty (the larger of the two rows'). With one row at that
// field the value applies at its temperature only, unless extrapolate is
// set. Outside the table's temperature range it returns ErrOutOfRange
// unless extrapolate is set, when the nearest two rows are extended
// linearly. ok is false when the vial has no reference for q at that field.
// A temperature that is NaN or infinite is an error.
func (v *Vial) ReferenceAt(q string, field, temp float64, extrapolate bool) (value, uncPct float64, ok bool, err error) {
	if !finite(temp) {
		// Found by FuzzParse: a NaN temperature fell through every
		// comparison and gave a NaN reference with no error.
		return 0, 0, false, fmt.Errorf("vial %s %s: session temperature %g °C is not a number", v.ID, q, temp)
	}
	var rows []Row
	best := math.Inf(1)
	for _, r := range v.Reference[q] {
		if d := math.Abs(r.Field - field); d <= 0.1+1e-9 && d < best-1e-9 {
			best = d
		}
	}
	for _, r := range v.Reference[q] {
		if math.Abs(math.Abs(r.Field-field)-best) <= 1e-9 {
			rows = append(rows, r)
		}
	}
	if len(rows) == 0 {
		return 0, 0, false, nil
	}
	sort.Slice(rows, func(i, j int) bool { return rows[i].Temperature < rows[j].Temperature })
	lo, hi := rows[0].Temperature, rows[len(rows)-1].Temperature
	if (temp < lo-1e-9 || temp > hi+1e-9) && !extrapolate {
		return 0, 0, true, fmt.Errorf("%w: vial %s %s covers %g–%g °C, session %g °C", ErrOutOfRange, v.ID, q, lo, hi, temp)
	}
	if len(rows) == 1 {
		return rows[0].Value, rows[0].Uncertainty, true, nil
	}
	// Bracketing pair (or the end pair when extrapolating).
	k := sort.Search(len(rows), func(i int) bool { return rows[i].Temperature >= temp })
	switch {
	case k == 0:
		k = 1
	case k >= len(rows):
		k = len(rows) - 1
	}
	a, b := rows[k-1], rows[k]
	if b.Temperature == a.Temperature {
		return a.Value, math.Max(a.Uncertainty, b.Uncertainty), true, nil
	}
	w := (temp - a.Temperature) / (b.Temperature - a.Temperature)
	return a.Value + w*(b.Value-a.Value), math.Max(a.Uncertainty, b.Uncertainty), true, nil
}
