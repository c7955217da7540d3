package phantom

import (
	"errors"
	"fmt"
	"math"
	"strings"

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

// Assess localises the phantom once per grid (maps on one grid share it),
// tells the vials apart by their values over every placement the layout's
// symmetry allows (identify; QA.Identity reports how), measures each vial
// and judges it against the definition. When the identity is undetermined
// every measured vial gets the verdict Undetermined, as do vials whose
// references another vial shares. It returns an error for a temperature
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
	res := &Result{QA: qa, Placements: make([]*Placement, len(inputs)), Slices: make([][]int, len(inputs))}
	for _, in := range inputs {
		if in.Locator != nil && !volume.SameGrid(in.Locator, in.Map, 1e-3) {
			return nil, fmt.Errorf("%s: the locator image and the %s map lie on different grids", in.Ref.Map, in.Quantity)
		}
		if in.Status != nil && len(in.Status) != in.Map.Voxels() {
			return nil, fmt.Errorf("%s: status map has %d voxels, the %s map %d", in.Ref.Map, len(in.Status), in.Quantity, in.Map.Voxels())
		}
	}
	groups := groupByGrid(inputs)
	id := &Identity{Status: IdentityFound, Measure: MatchMeasure, Threshold: IdentityThreshold}
	measured := make([][]VialQA, len(inputs))
	var chosen []*Placement
	var all []identityInput
	valuesDecide := false
	for _, g := range groups {
		first := &inputs[g[0]]
		loc := first.Locator
		if loc == nil {
			loc = first.Map
		}
		lo := opt.Locate
		pl, err := Locate(loc, def, &lo)
		if err != nil {
			return nil, fmt.Errorf("%s: %v", first.Ref.Map, err)
		}
		slices := Slices(loc, 0.9)
		if len(slices) == 0 {
			slices = []int{pl.Slice}
		}
		ids := make([]identityInput, len(g))
		for k, i := range g {
			ids[k] = identityInput{in: &inputs[i], ref: make([]float64, len(def.Vials)), refUnc: make([]float64, len(def.Vials)), slices: slices}
			for v := range def.Vials {
				if ref, unc, ok, err := def.Vials[v].ReferenceAt(inputs[i].Quantity, s.Field, s.Temperature, opt.Extrapolate); err == nil && ok {
					ids[k].ref[v], ids[k].refUnc[v] = ref, unc
					ids[k].unc = math.Max(ids[k].unc, unc)
				}
			}
		}
		p, meas, ig, err := identify(def, ids, pl, lo.Rotation, lo.Mirrored, frac, minN)
		if err != nil {
			return nil, err
		}
		valuesDecide = valuesDecide || (ig.Placements > 1 && ig.Status != IdentityGiven)
		all = append(all, ids...)
		for k, i := range g {
			res.Placements[i], res.Slices[i], measured[i] = p, slices, meas[k]
		}
		chosen = append(chosen, p)
		id.Groups = append(id.Groups, ig)
	}
	settle(id, def, chosen)
	qa.Identity = id
	// Vials of the same values are ambiguous wherever the values decide.
	var tw map[int][]string
	if valuesDecide {
		tw = twins(def, all)
	}
	for n, in := range inputs {
		pl := res.Placements[n]
		vials := measured[n]
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
			switch {
			case vials[i].Verdict == NotMeasured:
			case id.Status == IdentityUndetermined:
				vials[i].Verdict, vials[i].Deviation = Undetermined, math.NaN()
				vials[i].Note = "identity undetermined"
			case len(tw[i]) > 0:
				vials[i].Verdict, vials[i].Deviation = Undetermined, math.NaN()
				vials[i].Note = "ambiguous: values cannot tell it from " + joinIDs(tw[i])
			}
		}
		ref := in.Ref
		ref.Quantity = in.Quantity
		ref.Localisation = Localisation{Center: pl.Center, Rotation: pl.Rotation, Mirrored: pl.Mirrored,
			Slice: pl.Slice, Confidence: pl.Confidence, Method: pl.Method, Residual: pl.Residual}
		if !math.IsNaN(pl.Plane) {
			p := pl.Plane
			ref.Localisation.SpherePlane = &p
		}
		qa.Series = append(qa.Series, ref)
		qa.Vials = append(qa.Vials, vials...)
	}
	qa.Verdict = Overall(qa.Vials)
	return res, nil
}

// groupByGrid returns the indices of the inputs by grid: maps on one grid
// get one identity.
func groupByGrid(inputs []Input) [][]int {
	var groups [][]int
	for i, in := range inputs {
		found := false
		for g := range groups {
			if volume.SameGrid(inputs[groups[g][0]].Map, in.Map, 1e-3) {
				groups[g] = append(groups[g], i)
				found = true
				break
			}
		}
		if !found {
			groups = append(groups, []int{i})
		}
	}
	return groups
}

// settle sets the session's identity from its groups': undetermined when
// any group is, or when groups on different grids place the vials
// differently; given when every group's was given; found otherwise.
func settle(id *Identity, def *Definition, chosen []*Placement) {
	for g := 1; g < len(chosen); g++ {
		if !agree(def, chosen[0], chosen[g]) {
			for k := range id.Groups {
				id.Groups[k].Status = IdentityUndetermined
			}
			id.Status = IdentityUndetermined
			id.Reason = fmt.Sprintf("the %s and %s maps lie on different grids and their identities put the vials in different places",
				strings.Join(id.Groups[0].Quantities, "+"), strings.Join(id.Groups[g].Quantities, "+"))
		}
	}
	if id.Status != IdentityUndetermined {
		given := true
		for _, ig := range id.Groups {
			switch ig.Status {
			case IdentityUndetermined:
				id.Status, id.Reason = IdentityUndetermined, ig.Reason
			case IdentityFound:
				given = false
			}
		}
		if id.Status != IdentityUndetermined {
			if given {
				id.Status = IdentityGiven
			}
			id.Reason = id.Groups[0].Reason
		}
	}
	if id.Status == IdentityUndetermined {
		id.Fix = fixHint
	}
}
