package pipeline

import (
	"fmt"
	"github.com/tauvox/tauvox/io/series"
	"image/color"
	"math"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

// OverrideProtocol returns the protocol acq with the lists te, ti, tr, fa
// (nil: keep) put in: one value applies to every volume, several give one
// per volume. Lists of a length other than acq's make a protocol of that
// many volumes keeping only the default's TR and flip angle (constant in
// every simulator protocol).
func OverrideProtocol(acq []volume.Acquisition, te, ti, tr, fa []float64) ([]volume.Acquisition, error) {
	if te == nil && ti == nil && tr == nil && fa == nil {
		return acq, nil
	}
	for i, l := range [][]float64{te, ti, tr, fa} {
		if err := series.CheckUnits([]string{"te", "ti", "tr", "fa"}[i], l); err != nil {
			return nil, err
		}
	}
	n := 0
	for _, l := range [][]float64{te, ti, tr, fa} {
		if len(l) > 1 {
			if n != 0 && len(l) != n {
				return nil, fmt.Errorf("the protocol lists have %d and %d values", n, len(l))
			}
			n = len(l)
		}
	}
	if n == 0 {
		n = len(acq)
	}
	// Start from the default protocol when the lengths agree; otherwise
	// keep only its TR and flip angle (constant in every default).
	base := acq
	acq = make([]volume.Acquisition, n)
	for i := range acq {
		if n == len(base) {
			acq[i] = base[i]
		} else {
			acq[i] = volume.Unknown()
			acq[i].RepetitionTime, acq[i].FlipAngle = base[0].RepetitionTime, base[0].FlipAngle
		}
	}
	put := func(l []float64, set func(a *volume.Acquisition, v float64)) {
		if l == nil {
			return
		}
		for i := range acq {
			v := l[0]
			if len(l) > 1 {
				v = l[i]
			}
			set(&acq[i], v)
		}
	}
	put(te, func(a *volume.Acquisition, v float64) { a.EchoTime = v })
	put(ti, func(a *volume.Acquisition, v float64) { a.InversionTime = v })
	put(tr, func(a *volume.Acquisition, v float64) { a.RepetitionTime = v })
	put(fa, func(a *volume.Acquisition, v float64) { a.FlipAngle = v })
	return acq, nil
}

// JSONRows replaces NaN (not representable in JSON) by null.
func JSONRows(rows []fit.ValidationRow) []map[string]any {
	var out []map[string]any
	for _, r := range rows {
		num := func(x float64) any {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return nil
			}
			return x
		}
		out = append(out, map[string]any{
			"truth_ms": r.Truth, "trials": r.Trials, "converged": r.OK, "mean_ms": num(r.Mean), "bias_pct": num(r.BiasPct),
			"sd_ms": num(r.SD), "sd_err_ms": num(r.SDErr), "crlb_sd_ms": num(r.CRLB), "efficiency": num(r.Efficiency),
			"mean_se_ms": num(r.MeanSE), "coverage_1se": num(r.Cover1), "coverage_1.96se": num(r.Cover196),
		})
	}
	return out
}

// ProtocolRecords lists each volume's known parameters for JSON output.
func ProtocolRecords(acq []volume.Acquisition) []map[string]any {
	var out []map[string]any
	for _, a := range acq {
		rec := map[string]any{}
		for k, v := range map[string]float64{"te_ms": a.EchoTime, "ti_ms": a.InversionTime, "tr_ms": a.RepetitionTime, "flip_deg": a.FlipAngle} {
			if !math.IsNaN(v) {
				rec[k] = v
			}
		}
		out = append(out, rec)
	}
	return out
}

// ProtocolLine lists the parameters that are known, as TE 10,20,… ms.
func ProtocolLine(acq []volume.Acquisition) string {
	var parts []string
	for _, p := range []struct {
		name, unit string
		get        func(volume.Acquisition) float64
	}{
		{"TE", "ms", func(a volume.Acquisition) float64 { return a.EchoTime }},
		{"TI", "ms", func(a volume.Acquisition) float64 { return a.InversionTime }},
		{"TR", "ms", func(a volume.Acquisition) float64 { return a.RepetitionTime }},
		{"FA", "°", func(a volume.Acquisition) float64 { return a.FlipAngle }},
	} {
		vals := volume.Values(nil, acq, p.get)
		if len(vals) == 0 || math.IsNaN(vals[0]) {
			continue
		}
		same := true
		var s []string
		for _, v := range vals {
			same = same && v == vals[0]
			s = append(s, fmt.Sprintf("%g", v))
		}
		if same {
			s = s[:1]
		}
		parts = append(parts, p.name+" "+strings.Join(s, ",")+" "+p.unit)
	}
	return strings.Join(parts, "; ")
}

// ValidationPlot draws the Monte Carlo SD (with its standard error as
// error bars) and the CRLB against the true value.
func ValidationPlot(path string, rows []fit.ValidationRow, m fit.Model, quantity string, snr float64, noise string) error {
	p := plot.New()
	p.Title.Text = fmt.Sprintf("%s/%s: precision at SNR %g (%s noise)", m.Name(), m.Method(), snr, noise)
	p.X.Label.Text = "true " + quantity + " (ms)"
	p.Y.Label.Text = "SD of " + quantity + " (ms)"
	var sd, bound plotter.XYs
	var errs plotter.YErrors
	for _, r := range rows {
		if finiteAll(r.SD, r.SDErr) {
			sd = append(sd, plotter.XY{X: r.Truth, Y: r.SD})
			errs = append(errs, struct{ Low, High float64 }{r.SDErr, r.SDErr})
		}
		if finiteAll(r.CRLB) {
			bound = append(bound, plotter.XY{X: r.Truth, Y: r.CRLB})
		}
	}
	if len(bound) > 0 {
		l, err := plotter.NewLine(bound)
		if err != nil {
			return err
		}
		l.Color = color.RGBA{200, 60, 40, 255}
		l.Width = vg.Points(1.5)
		p.Add(l)
		p.Legend.Add("CRLB (Gaussian)", l)
	}
	if len(sd) > 0 {
		s, err := plotter.NewScatter(sd)
		if err != nil {
			return err
		}
		s.Color = color.RGBA{30, 80, 160, 255}
		s.Radius = vg.Points(3)
		p.Add(s)
		p.Legend.Add("Monte Carlo SD", s)
		eb, err := plotter.NewYErrorBars(struct {
			plotter.XYer
			plotter.YErrorer
		}{sd, errs})
		if err != nil {
			return err
		}
		eb.Color = s.Color
		p.Add(eb)
	}
	p.Legend.Top, p.Legend.Left = true, true
	p.Add(plotter.NewGrid())
	if err := p.Save(6*vg.Inch, 4*vg.Inch, path); err != nil {
		return fmt.Errorf("%s: %v", path, err)
	}
	return nil
}

func finiteAll(xs ...float64) bool {
	for _, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}
