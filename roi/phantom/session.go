package phantom

import (
	"errors"
	"fmt"
	"math"

	"github.com/tauvox/tauvox/volume"
)

// Input is one measured map of a session.
type Input struct {
	Quantity string        // "T1" or "T2"
	Map      *volume.Image // the map, ms
	Status   []uint8       // per-voxel fit status (nil: every finite value counts)
	// Locator is the image the phantom is found on (an M0 map or first
	// echo on the same grid); nil uses Map itself.
	Locator *volume.Image
	Ref     SeriesRef // model, method, protocol, inputs; Localisation is filled in
}

// Options steer Assess. Temperature and Field are required.
type Options struct {
	Session     Session // identity; Field and Temperature must be set
	Extrapolate bool    // allow references beyond their table's temperatures
	ROIFraction float64 // default DefaultROIFraction
	MinVoxels   int     // fewest usable voxels for a verdict; default 5
	Locate      LocateOptions
	Tool        Tool
	Caution     string
}

// Result holds a session's QA and, per input, where the phantom was found
// and which slices were measured.
type Result struct {
	QA         *QA
	Placements []*Placement
	Slices     [][]int
}

// Assess localises the phantom in every input, measures each vial and
// judges it against the definition. It returns an error for a temperature
// outside a reference table (unless Extrapolate), maps whose grids differ
// from their locator or status, or a phantom that cannot be found.
func Assess(def *Definition, inputs []Input, opt *Options) (*Result, error) {
	if len(inputs) == 0 {
		return nil, errors.New("no T1 or T2 map to measure")
	}
	s := opt.Session
	if !(s.Field > 0) {
		return nil, errors.New("field strength unknown: give --field")
	}
	if math.IsNaN(s.Temperature) || math.IsInf(s.Temperature, 0) {
		return nil, errors.New("temperature must be a number (°C)")
	}
	frac := opt.ROIFraction
	if frac == 0 {
		frac = DefaultROIFraction
	}
	minN := opt.MinVoxels
	if minN == 0 {
		minN = 5
	}
	// References first: a temperature outside a table is an error before
	// any image work.
	for _, in := range inputs {
		for i := range def.Vials {
			if _, _, _, err := def.Vials[i].ReferenceAt(in.Quantity, s.Field, s.Temperature, opt.Extrapolate); err != nil {
				return nil, fmt.Errorf("%w (use --extrapolate to extend the table)", err)
			}
		}
	}
	s.Phantom = def.Name
	qa := &QA{Format: QAFormat, Tool: opt.Tool, Session: s, Caution: opt.Caution}
	res := &Result{QA: qa}
	for _, in := range inputs {
		loc := in.Locator
		if loc == nil {
			loc = in.Map
		}
		if !volume.SameGrid(loc, in.Map, 1e-3) {
			return nil, fmt.Errorf("%s: the locator image and the %s map lie on different grids", in.Ref.Map, in.Quantity)
		}
		if in.Status != nil && len(in.Status) != in.Map.Voxels() {
			return nil, fmt.Errorf("%s: status map has %d voxels, the %s map %d", in.Ref.Map, len(in.Status), in.Quantity, in.Map.Voxels())
		}
		lo := opt.Locate
		lo.Map = in.Map
		lo.Expected = map[string]float64{}
		for i := range def.Vials {
			v := &def.Vials[i]
			if ref, _, ok, err := v.ReferenceAt(in.Quantity, s.Field, s.Temperature, true); err == nil && ok {
				lo.Expected[v.ID] = ref
			}
		}
		pl, err := Locate(loc, def, &lo)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", in.Ref.Map, err)
		}
		slices := Slices(loc, 0.9)
		if len(slices) == 0 {
			slices = []int{pl.Slice}
		}
		vials, err := Measure(in.Map, in.Status, pl, def, in.Quantity, frac, slices)
		if err != nil {
			return nil, err
		}
		for i := range vials {
			if err := Judge(&vials[i], &def.Vials[i], def.Tolerance, s.Field, s.Temperature, opt.Extrapolate, minN); err != nil {
				return nil, err
			}
			if opt.Extrapolate {
				_, _, _, strict := def.Vials[i].ReferenceAt(in.Quantity, s.Field, s.Temperature, false)
				if strict != nil {
					qa.Session.Extrapolated = true
					if vials[i].Note == "" {
						vials[i].Note = "reference extrapolated"
					}
				}
			}
		}
		ref := in.Ref
		ref.Quantity = in.Quantity
		ref.Localisation = Localisation{Center: pl.Center, Rotation: pl.Rotation, Mirrored: pl.Mirrored,
			Slice: pl.Slice, Confidence: pl.Confidence, Method: pl.Method, Residual: pl.Residual}
		qa.Series = append(qa.Series, ref)
		qa.Vials = append(qa.Vials, vials...)
		res.Placements = append(res.Placements, pl)
		res.Slices = append(res.Slices, slices)
	}
	qa.Verdict = Overall(qa.Vials)
	return res, nil
}
