package main

import (
	"context"
	"encoding/json"
	"fmt"
	"image/color"
	"math"
	"strings"
	"text/tabwriter"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/volume"
)

const validateSummary = `Monte Carlo study of a model and protocol: for every true time constant,
--trials voxels with noise of SD σ = M0/SNR (M0 = 1) are simulated and
fitted. Prints per true value: converged trials, mean, bias (%), SD of the
estimates, the Cramér–Rao lower bound on the SD (Gaussian noise of the same
σ; for --noise rician it is the Gaussian bound, which the Rician one
approaches at high SNR), efficiency CRLB²/SD², the mean reported standard
error and its coverage: the fraction of trials with |estimate − truth| within
1 and 1.96 reported SEs. Results depend on --seed only, not on --workers.

The protocol defaults to the one tauvox simulate uses for the model; --te,
--ti, --tr, --fa (ms, degrees; lists "10,20" or ranges "start:step:stop")
replace it. The true values come from --t2, --t2star or --t1 (same syntax).`

func runValidate(ctx context.Context, args []string, e *env) error {
	var (
		model, method, noise, plotFile string
		snr                            float64
		trials, workers                int
		seed                           uint64
		jsonOut, efficiency            bool
		te, ti, tr, fa, t2, t2s, t1    listFlag
	)
	fs := newFlags("validate", "--model M [--snr S] [--t2 LIST | --t1 LIST] [options]", validateSummary, e)
	fs.StringVar(&model, "model", "", "signal model: "+strings.Join(validModels(), ", ")+" (required)")
	fs.StringVar(&method, "method", "", "estimation method (default: the model's first)")
	fs.BoolVar(&efficiency, "efficiency", false, "t1-sr: fit the saturation efficiency")
	fs.Var(&te, "te", "echo times, ms")
	fs.Var(&ti, "ti", "inversion times, ms")
	fs.Var(&tr, "tr", "repetition times, ms")
	fs.Var(&fa, "fa", "flip angles, degrees")
	fs.Var(&t2, "t2", "true T2 values, ms (t2; default 20:20:300)")
	fs.Var(&t2s, "t2star", "true T2* values, ms (t2star; default 5:5:60)")
	fs.Var(&t1, "t1", "true T1 values, ms (t1-ir, t1-sr default 200:200:3000; t1-vfa 200:200:2000)")
	fs.Float64Var(&snr, "snr", 100, "M0/σ")
	fs.StringVar(&noise, "noise", "gaussian", "gaussian (added to the magnitude) or rician")
	fs.IntVar(&trials, "trials", 1000, "trials per true value")
	fs.Uint64Var(&seed, "seed", 1, "noise seed")
	fs.IntVar(&workers, "workers", 0, "worker goroutines (default: one per CPU)")
	fs.BoolVar(&jsonOut, "json", false, "print JSON instead of a table")
	fs.StringVar(&plotFile, "plot", "", "write SD and CRLB against the true value to this .svg or .png")
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	switch {
	case model == "":
		return fmt.Errorf("--model is required (see --help)")
	case !(snr > 0) || math.IsInf(snr, 0):
		return fmt.Errorf("--snr must be positive")
	case trials < 2 || trials > 10_000_000:
		return fmt.Errorf("--trials must be 2 to 10000000")
	case workers < 0:
		return fmt.Errorf("--workers must be positive")
	case noise != "gaussian" && noise != "rician":
		return fmt.Errorf("--noise must be gaussian or rician")
	case plotFile != "" && !strings.HasSuffix(strings.ToLower(plotFile), ".svg") && !strings.HasSuffix(strings.ToLower(plotFile), ".png"):
		return fmt.Errorf("--plot must name a .svg or .png file")
	}
	info, ok := fit.Lookup(model)
	if !ok || info.Simulate == nil || info.Simulate.Truth == "" {
		return fmt.Errorf("validate supports models %s, not %q", strings.Join(validModels(), ", "), model)
	}
	def := info.Simulate.Truth
	m0, err := fit.New(fit.Spec{Model: model})
	if err != nil {
		return err
	}
	first := m0.Outputs()[0].Name // T2, T2star or T1
	quantity := strings.Replace(first, "star", "*", 1)
	truthFlag := map[string]*listFlag{"T2": &t2, "T2star": &t2s, "T1": &t1}[first]
	if truthFlag == nil {
		return fmt.Errorf("validate has no flag for the true %s values of model %s", first, model)
	}
	for name, f := range map[string]*listFlag{"t2": &t2, "t2star": &t2s, "t1": &t1} {
		if f.set && f != truthFlag {
			return fmt.Errorf("--%s does not apply to model %s (give the %s values)", name, model, quantity)
		}
	}
	truth := truthFlag.list()
	if truth == nil {
		truth, _ = sidecar.ParseList(def)
	}
	acq := info.Simulate.Acq()
	if te.set || ti.set || tr.set || fa.set {
		n := 0
		for _, l := range []*listFlag{&te, &ti, &tr, &fa} {
			if l.set && len(l.vals) > 1 {
				if n != 0 && len(l.vals) != n {
					return fmt.Errorf("the protocol lists have %d and %d values", n, len(l.vals))
				}
				n = len(l.vals)
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
		put := func(l *listFlag, set func(a *volume.Acquisition, v float64)) {
			if !l.set {
				return
			}
			for i := range acq {
				v := l.vals[0]
				if len(l.vals) > 1 {
					v = l.vals[i]
				}
				set(&acq[i], v)
			}
		}
		put(&te, func(a *volume.Acquisition, v float64) { a.EchoTime = v })
		put(&ti, func(a *volume.Acquisition, v float64) { a.InversionTime = v })
		put(&tr, func(a *volume.Acquisition, v float64) { a.RepetitionTime = v })
		put(&fa, func(a *volume.Acquisition, v float64) { a.FlipAngle = v })
	}
	m, err := fit.New(fit.Spec{Model: model, Method: method, Efficiency: efficiency})
	if err != nil {
		return err
	}
	nz := fit.GaussianNoise
	if noise == "rician" {
		nz = fit.RicianNoise
	}
	v := &fit.Validation{Model: m, Acq: acq, Truth: truth, SNR: snr, Noise: nz, Trials: trials, Seed: seed, Workers: workers}
	rows, err := fit.Validate(ctx, v)
	if err != nil {
		return fmt.Errorf("model %s: %v", model, err)
	}
	if plotFile != "" {
		if err := validationPlot(plotFile, rows, m, quantity, snr, noise); err != nil {
			return err
		}
	}
	if jsonOut {
		out := map[string]any{
			"format": "tauvox-validation/1", "model": m.Name(), "method": m.Method(), "snr": snr, "noise": noise,
			"trials": trials, "seed": seed, "quantity": quantity, "protocol": protocolRecords(acq),
			"crlb": "Gaussian-noise Cramér–Rao bound", "rows": jsonRows(rows),
		}
		b, err := json.MarshalIndent(out, "", "  ")
		if err != nil {
			return err
		}
		_, err = fmt.Fprintln(e.stdout, string(b))
		return err
	}
	fmt.Fprintf(e.stdout, "%s/%s, %d points, SNR %g (σ = %g), %s noise, %d trials per value, seed %d\n",
		m.Name(), m.Method(), len(acq), snr, 1/snr, noise, trials, seed)
	fmt.Fprintf(e.stdout, "protocol: %s\n", protocolLine(acq))
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "true %s (ms)\tok\tmean\tbias %%\tSD\tCRLB SD\tefficiency\tmean SE\t±1 SE\t±1.96 SE\t\n", quantity)
	for _, r := range rows {
		fmt.Fprintf(tw, "%g\t%d\t%.3f\t%+.2f\t%.3f\t%.3f\t%.3f\t%.3f\t%.3f\t%.3f\t\n",
			r.Truth, r.OK, r.Mean, r.BiasPct, r.SD, r.CRLB, r.Efficiency, r.MeanSE, r.Cover1, r.Cover196)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if noise == "rician" {
		fmt.Fprintln(e.stdout, "CRLB: the Gaussian-noise bound; with Rician noise it is approached only at high SNR.")
	}
	return nil
}

// jsonRows replaces NaN (not representable in JSON) by null.
func jsonRows(rows []fit.ValidationRow) []map[string]any {
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

func protocolRecords(acq []volume.Acquisition) []map[string]any {
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

// protocolLine lists the parameters that are known, as TE 10,20,… ms.
func protocolLine(acq []volume.Acquisition) string {
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

// validationPlot draws the Monte Carlo SD (with its standard error as
// error bars) and the CRLB against the true value.
func validationPlot(path string, rows []fit.ValidationRow, m fit.Model, quantity string, snr float64, noise string) error {
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

// validModels lists the models validate can study: those with a
// simulator protocol and a default true-value range in the registry.
func validModels() []string {
	var n []string
	for _, m := range fit.Models() {
		if m.Simulate != nil && m.Simulate.Truth != "" {
			n = append(n, m.Name)
		}
	}
	return n
}
