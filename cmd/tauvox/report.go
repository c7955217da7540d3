package main

import (
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/roi/phantom"
)

// writeReport writes report.html: per measured map its slice with the vial
// regions, plus everything in qa.
func writeReport(path string, qa *phantom.QA, res *phantom.Result, inputs []phantom.Input, tol map[string]phantom.Tolerance, hist map[string]string) error {
	page := &report.Page{QA: qa, Tolerance: tol, History: hist}
	for n, in := range inputs {
		pl := res.Placements[n]
		m := in.Map
		nx, ny := m.Dims[0], m.Dims[1]
		k := pl.Slice
		vs := m.Affine.VoxelSize()
		v := report.View{Quantity: in.Quantity, Unit: "ms", Values: m.Data[k*nx*ny : (k+1)*nx*ny], Nx: nx, Ny: ny,
			PixelMM: [2]float64{vs[0], vs[1]}, Slice: k}
		inv, ok := m.Affine.Inverse()
		if !ok {
			continue
		}
		// Window on the vials' references, so the fill or the air does not
		// set the contrast.
		top := 0.0
		for _, r := range qa.Vials {
			if r.Quantity == in.Quantity {
				top = max(top, r.Reference, r.Median)
			}
		}
		if top > 0 {
			v.Window = preview.Window{Lo: 0, Hi: 1.25 * top}
		}
		for _, r := range qa.Vials {
			if r.Quantity != in.Quantity {
				continue
			}
			c := r.CenterMM
			i, j, _ := inv.Apply(c[0], c[1], c[2])
			v.Regions = append(v.Regions, report.Region{ID: r.ID, I: i, J: j, Radius: r.RadiusMM / vs[0], Verdict: r.Verdict})
		}
		page.Views = append(page.Views, v)
	}
	return report.Write(path, page)
}
