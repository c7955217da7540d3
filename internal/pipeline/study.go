package pipeline

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"text/tabwriter"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/io/sidecar"
	"github.com/tauvox/tauvox/volume"
)

// Study is a Monte Carlo study of a model and protocol (tauvox validate):
// the settings of fit.Validate in the command line's terms.
type Study struct {
	Model, Method string // Method "" is the model's first
	Efficiency    bool   // t1-sr: fit the saturation efficiency
	// Truth holds the true values given, by the name of the model's first
	// output (T2, T2star, T1), in ms; a list under another name is an
	// error, and none gives the registry's default range.
	Truth map[string][]float64
	// TE, TI, TR, FA replace the simulator protocol's values
	// (OverrideProtocol); nil keeps them.
	TE, TI, TR, FA []float64
	SNR            float64
	Noise          string // "gaussian" or "rician"
	Trials         int
	Seed           uint64
	Workers        int
	Plot           string // "" or a .svg or .png file for Run to draw the result into
}

// StudyResult is a study's outcome.
type StudyResult struct {
	Study    *Study
	Model    fit.Model
	Quantity string // the studied quantity: T2, T2* or T1
	Acq      []volume.Acquisition
	Rows     []fit.ValidationRow
}

// StudyModels lists the models a study can take: those with a simulator
// protocol and a default true-value range in the registry.
func StudyModels() []string {
	var n []string
	for _, m := range fit.Models() {
		if m.Simulate != nil && m.Simulate.Truth != "" {
			n = append(n, m.Name)
		}
	}
	return n
}

// check refuses settings out of range, naming the flag that sets them.
func (s *Study) check() error {
	lower := strings.ToLower(s.Plot)
	switch {
	case s.Model == "":
		return fmt.Errorf("--model is required (see --help)")
	case !(s.SNR > 0) || math.IsInf(s.SNR, 0):
		return fmt.Errorf("--snr must be positive")
	case s.Trials < 2 || s.Trials > 10_000_000:
		return fmt.Errorf("--trials must be 2 to 10000000")
	case fit.CheckWorkers(s.Workers) != nil:
		return fit.CheckWorkers(s.Workers)
	case s.Noise != "gaussian" && s.Noise != "rician":
		return fmt.Errorf("--noise must be gaussian or rician")
	case s.Plot != "" && !strings.HasSuffix(lower, ".svg") && !strings.HasSuffix(lower, ".png"):
		return fmt.Errorf("--plot must name a .svg or .png file")
	}
	return nil
}

// Run checks the study's settings and the model against the registry,
// makes the protocol, runs fit.Validate and draws the plot when asked.
func (s *Study) Run(ctx context.Context) (*StudyResult, error) {
	if err := s.check(); err != nil {
		return nil, err
	}
	info, ok := fit.Lookup(s.Model)
	if !ok || info.Simulate == nil || info.Simulate.Truth == "" {
		return nil, fmt.Errorf("validate supports models %s, not %q", strings.Join(StudyModels(), ", "), s.Model)
	}
	m0, err := fit.New(fit.Spec{Model: s.Model})
	if err != nil {
		return nil, err
	}
	first := m0.Outputs()[0].Name // T2, T2star or T1
	quantity := strings.Replace(first, "star", "*", 1)
	if first != "T2" && first != "T2star" && first != "T1" {
		return nil, fmt.Errorf("validate has no flag for the true %s values of model %s", first, s.Model)
	}
	names := make([]string, 0, len(s.Truth))
	for name := range s.Truth {
		names = append(names, name)
	}
	sort.Strings(names)
	for _, name := range names {
		if name != first {
			return nil, fmt.Errorf("--%s does not apply to model %s (give the %s values)", strings.ToLower(name), s.Model, quantity)
		}
	}
	truth := s.Truth[first]
	if truth == nil {
		truth, _ = sidecar.ParseList(info.Simulate.Truth)
	}
	acq, err := OverrideProtocol(info.Simulate.Acq(), s.TE, s.TI, s.TR, s.FA)
	if err != nil {
		return nil, err
	}
	m, err := fit.New(fit.Spec{Model: s.Model, Method: s.Method, Efficiency: s.Efficiency})
	if err != nil {
		return nil, err
	}
	nz := fit.GaussianNoise
	if s.Noise == "rician" {
		nz = fit.RicianNoise
	}
	v := &fit.Validation{Model: m, Acq: acq, Truth: truth, SNR: s.SNR, Noise: nz, Trials: s.Trials, Seed: s.Seed, Workers: s.Workers}
	rows, err := fit.Validate(ctx, v)
	if err != nil {
		return nil, fmt.Errorf("model %s: %v", s.Model, err)
	}
	if s.Plot != "" {
		if err := ValidationPlot(s.Plot, rows, m, quantity, s.SNR, s.Noise); err != nil {
			return nil, err
		}
	}
	return &StudyResult{Study: s, Model: m, Quantity: quantity, Acq: acq, Rows: rows}, nil
}

// WriteTable writes the result as text: the study's settings, the
// protocol, and per true value the converged trials, mean, bias, SD, CRLB,
// efficiency, mean reported SE and its coverage.
func (r *StudyResult) WriteTable(w io.Writer) error {
	s, m := r.Study, r.Model
	fmt.Fprintf(w, "%s/%s, %d points, SNR %g (σ = %g), %s noise, %d trials per value, seed %d\n",
		m.Name(), m.Method(), len(r.Acq), s.SNR, 1/s.SNR, s.Noise, s.Trials, s.Seed)
	fmt.Fprintf(w, "protocol: %s\n", ProtocolLine(r.Acq))
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "true %s (ms)\tok\tmean\tbias %%\tSD\tCRLB SD\tefficiency\tmean SE\t±1 SE\t±1.96 SE\t\n", r.Quantity)
	for _, v := range r.Rows {
		fmt.Fprintf(tw, "%g\t%d\t%.3f\t%+.2f\t%.3f\t%.3f\t%.3f\t%.3f\t%.3f\t%.3f\t\n",
			v.Truth, v.OK, v.Mean, v.BiasPct, v.SD, v.CRLB, v.Efficiency, v.MeanSE, v.Cover1, v.Cover196)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if s.Noise == "rician" {
		fmt.Fprintln(w, "CRLB: the Gaussian-noise bound; with Rician noise it is approached only at high SNR.")
	}
	return nil
}

// JSON returns the result as a tauvox-validation/1 document.
func (r *StudyResult) JSON() ([]byte, error) {
	s := r.Study
	return json.MarshalIndent(map[string]any{
		"format": "tauvox-validation/1", "model": r.Model.Name(), "method": r.Model.Method(), "snr": s.SNR, "noise": s.Noise,
		"trials": s.Trials, "seed": s.Seed, "quantity": r.Quantity, "protocol": ProtocolRecords(r.Acq),
		"crlb": "Gaussian-noise Cramér–Rao bound", "rows": JSONRows(r.Rows),
	}, "", "  ")
}
