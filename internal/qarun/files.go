package qarun

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/internal/report"
	"github.com/tauvox/tauvox/io/mapset"
	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/roi/history"
	"github.com/tauvox/tauvox/roi/phantom"
)

// JSON returns qa.json's content.
func (s *Session) JSON() ([]byte, error) {
	b, err := json.MarshalIndent(s.QA, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(sidecar.Tidy(b), '\n'), nil
}

// Write writes qa.json, qa.csv and report.html into the folder dir (each
// file atomically). hist holds what the stability history flags per vial
// (report.HistoryFlags; nil for none).
func (s *Session) Write(dir string, hist map[string]string) error {
	b, err := s.JSON()
	if err != nil {
		return fmt.Errorf("%s: qa.json: %v", mapset.FinalPath(dir), err)
	}
	if err := output.WriteFile(filepath.Join(dir, "qa.json"), b); err != nil {
		return err
	}
	if err := output.WriteFile(filepath.Join(dir, "qa.csv"), CSV(s.QA)); err != nil {
		return err
	}
	return s.Report(filepath.Join(dir, "report.html"), hist)
}

// CSV renders the per-vial results; times in ms.
func CSV(qa *phantom.QA) []byte {
	num := output.Num
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.Write([]string{"vial", "quantity", "n", "mean_ms", "median_ms", "sd_ms", "failed_fraction", "reference_ms",
		"reference_uncertainty_pct", "deviation_pct", "tolerance_ms", "verdict", "note"})
	for _, v := range qa.Vials {
		ref, dev, tol := "", "", ""
		if v.Reference > 0 {
			ref, tol = num(v.Reference, 2), num(v.Tolerance, 2)
			if v.Verdict != phantom.NotMeasured {
				dev = num(v.Deviation, 2)
			}
		}
		w.Write([]string{v.ID, v.Quantity, fmt.Sprint(v.N), num(v.Mean, 2), num(v.Median, 2), num(v.SD, 2),
			num(v.Failed, 3), ref, num(v.RefUncPct, 2), dev, tol, v.Verdict, v.Note})
	}
	w.Flush()
	return b.Bytes()
}

// Report writes report.html: per measured map its slice with the vial
// regions, plus everything in the QA result.
func (s *Session) Report(path string, hist map[string]string) error {
	qa := s.QA
	page := &report.Page{QA: qa, Tolerance: s.Def.Tolerance, History: hist}
	for n, in := range s.Inputs {
		pl := s.Result.Placements[n]
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

// HistoryFlags returns what the stability history in db flags per vial
// (report.HistoryFlags) when the session joins the sessions of its
// scanner recorded there; recorded tells that db holds it already.
func (s *Session) HistoryFlags(ctx context.Context, db *history.Store, recorded bool) (map[string]string, error) {
	pts, err := db.Points(ctx, s.QA.Session.Scanner)
	if err != nil {
		return nil, err
	}
	if !recorded {
		pts = history.WithSession(pts, s.QA)
	}
	return report.HistoryFlags(history.Analyse(pts, nil)), nil
}

// HistoryFrom returns what the stability history in the database at path
// (opened read only) flags per vial with the session added to it
// (HistoryFlags); nil for path "".
func (s *Session) HistoryFrom(ctx context.Context, path string) (map[string]string, error) {
	if path == "" {
		return nil, nil
	}
	if _, err := os.Stat(path); err != nil {
		return nil, err
	}
	db, err := history.Open(path, &history.Options{ReadOnly: true})
	if err != nil {
		return nil, err
	}
	defer db.Close()
	return s.HistoryFlags(ctx, db, false)
}
