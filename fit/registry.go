package fit

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/tauvox/tauvox/volume"
)

// Spec selects a model and its settings by name, as the command line does.
// The zero value of every field but Model selects the model's default.
type Spec struct {
	Model      string  // a registered model name (see Models)
	Method     string  // model-specific; "" for the default
	Offset     bool    // t2, t2star: fit a constant offset
	Sigma      float64 // t2, t2star, t2-epg: noise SD for the Rician noise-floor model; 0 for none
	Efficiency bool    // t1-sr: fit the saturation efficiency
	MinT, MaxT float64 // bounds of the time constant, ms (t2-spectrum: the basis range); 0 for the default
	Gonum      bool    // use the gonum optimiser instead of the dedicated solver
	// T1Fixed is the fixed T1 in ms of the EPG models (t2-epg, and
	// t2-spectrum with EPGBasis); 0 for the default 1000.
	T1Fixed float64
	// RefocusAngle is the nominal refocusing angle in degrees of t2-epg; 0
	// for the default 180.
	RefocusAngle float64
	// Window is the upper T2 limit in ms of the short (myelin-water)
	// window of t2-spectrum; 0 for the default 40.
	Window float64
	// EPGBasis makes t2-spectrum use EPG basis functions with a fitted
	// refocusing angle.
	EPGBasis bool
}

// ModelInfo is a model's entry in the registry: everything the rest of
// tauvox needs to know about it (help, flag validation, scan's suggestion,
// batch defaults, BIDS sidecars, the simulator, the docs' model table).
type ModelInfo struct {
	Name    string   // command-line name, e.g. "t2"
	Methods []string // estimation methods; the first is the default
	Summary string   // one line: acquisition and equation
	// Needs is the acquisition parameter that must vary across volumes
	// (a volume.Acquisition field name: EchoTime, InversionTime,
	// FlipAngle, RepetitionTime).
	Needs string
	// Sequence tells scan which of several models varying the same
	// parameter to suggest: SeqGradientEcho for gradient-echo trains,
	// SeqSpinEcho otherwise. Suggest marks the one scan suggests.
	Sequence Sequence
	Suggest  bool
	// Options are the flags of the model-specific settings it takes
	// (see ModelOptions), beyond the generic --method, --min, --max, --gonum.
	Options []string
	// Suffixes are the raw BIDS file-collection suffixes (BIDS
	// qMRI appendix) that tauvox batch fits with this model by default.
	Suffixes []string
	// Reference cites the method for the EstimationReference key of the
	// BIDS sidecars (the sources of docs/methods.md).
	Reference string
	// Simulate, when not nil, is the protocol `tauvox simulate --kind
	// NAME` writes for the model.
	Simulate *Protocol
	// Help is a few lines on the model's equation, assumptions and
	// outputs, for `tauvox fit --model NAME --help`.
	Help string
	// make builds the model; New has checked method and options.
	make func(s Spec, meth Method, solver Solver) Model
}

// Protocol is a simulated acquisition: its sequence and per-volume
// parameters (ms, degrees).
type Protocol struct {
	Summary string
	Seq     Sequence
	Acq     func() []volume.Acquisition
	// Truth is the default range of true values of the model's first
	// output for `tauvox validate` (ms, a list or start:step:stop).
	Truth string
}

// Option is a model-specific setting: the flag that sets it, the key under
// which provenance.json records it, and what it is.
type Option struct {
	Flag  string // command-line flag without dashes, e.g. "refocus"
	Key   string // settings key in provenance.json, e.g. "refocus_deg"
	What  string // what it is, for messages, e.g. "the nominal refocusing angle"
	value func(*Spec) any
	set   func(*Spec) bool
}

// ModelOptions lists every model-specific setting. Options without a Spec
// field (the B1 map, the noise model) are set by the pipeline; their
// value is recorded there.
var ModelOptions = []Option{
	{Flag: "offset", Key: "offset", What: "a constant offset", value: func(s *Spec) any { return s.Offset }, set: func(s *Spec) bool { return s.Offset }},
	{Flag: "noise", Key: "noise", What: "the Rician noise model"},
	{Flag: "sigma", Key: "sigma", What: "the Rician noise SD", set: func(s *Spec) bool { return s.Sigma > 0 }},
	{Flag: "efficiency", Key: "efficiency", What: "a fitted saturation efficiency", value: func(s *Spec) any { return s.Efficiency }, set: func(s *Spec) bool { return s.Efficiency }},
	{Flag: "t1", Key: "t1_fixed_ms", What: "the fixed T1", value: func(s *Spec) any { return s.T1Fixed }, set: func(s *Spec) bool { return s.T1Fixed != 0 }},
	{Flag: "refocus", Key: "refocus_deg", What: "the nominal refocusing angle", value: func(s *Spec) any { return s.RefocusAngle }, set: func(s *Spec) bool { return s.RefocusAngle != 0 }},
	{Flag: "window", Key: "window_ms", What: "the T2 window", value: func(s *Spec) any { return s.Window }, set: func(s *Spec) bool { return s.Window != 0 }},
	{Flag: "epg-basis", Key: "epg_basis", What: "the EPG basis", value: func(s *Spec) any { return s.EPGBasis }, set: func(s *Spec) bool { return s.EPGBasis }},
	{Flag: "b1", Key: "b1", What: "a B1 map"},
}

// RecordSettings puts into dst every Spec setting of the registry's
// options and the generic bounds (min_ms, max_ms), whether set or not, so
// that provenance files compare key by key.
func RecordSettings(dst map[string]any, s *Spec) {
	for _, o := range ModelOptions {
		if o.value != nil {
			dst[o.Key] = o.value(s)
		}
	}
	dst["min_ms"], dst["max_ms"] = s.MinT, s.MaxT
}

// Lookup returns the registry entry of a model name.
func Lookup(name string) (ModelInfo, bool) {
	for _, m := range registry {
		if m.Name == name {
			return m, true
		}
	}
	return ModelInfo{}, false
}

// Models lists the registered models in registry order.
func Models() []ModelInfo { return slices.Clone(registry) }

// Names returns the registered model names, comma-separated.
func Names() string {
	var n []string
	for _, m := range registry {
		n = append(n, m.Name)
	}
	return strings.Join(n, ", ")
}

// ModelsTaking returns the names of the models that take the option flag,
// comma-separated.
func ModelsTaking(flag string) string {
	var n []string
	for _, m := range registry {
		if slices.Contains(m.Options, flag) {
			n = append(n, m.Name)
		}
	}
	return strings.Join(n, ", ")
}

// Takes reports whether the model takes the option flag (e.g. "b1").
func Takes(model, flag string) bool {
	m, ok := Lookup(model)
	return ok && slices.Contains(m.Options, flag)
}

// Suggest returns the model scan suggests for a series whose varying
// parameter is needs (a volume.Acquisition field name) and whose sequence
// is seq (SeqGradientEcho or SeqSpinEcho; other values count as spin
// echo), or "" when none fits it.
func Suggest(needs string, seq Sequence) string {
	if seq != SeqGradientEcho {
		seq = SeqSpinEcho
	}
	best := ""
	for _, m := range registry {
		if m.Suggest && m.Needs == needs {
			if m.Sequence == seq {
				return m.Name
			}
			if best == "" {
				best = m.Name
			}
		}
	}
	return best
}

// DefaultSuffixes returns the raw BIDS suffix → model name map of the
// registry (the models tauvox batch fits by default).
func DefaultSuffixes() map[string]string {
	out := map[string]string{}
	for _, m := range registry {
		for _, s := range m.Suffixes {
			out[s] = m.Name
		}
	}
	return out
}

// New returns the model a Spec names, or an error naming the valid
// choices. Options the model does not take are refused.
func New(s Spec) (Model, error) {
	info, ok := Lookup(s.Model)
	if !ok {
		return nil, fmt.Errorf("unknown model %q (choose %s)", s.Model, Names())
	}
	if s.Method != "" && !slices.Contains(info.Methods, s.Method) {
		return nil, fmt.Errorf("model %s has no method %q (choose %s)", s.Model, s.Method, strings.Join(info.Methods, ", "))
	}
	for _, o := range ModelOptions {
		if o.set != nil && o.set(&s) && !slices.Contains(info.Options, o.Flag) {
			return nil, fmt.Errorf("--%s (%s) applies to %s only", o.Flag, o.What, ModelsTaking(o.Flag))
		}
	}
	if math.IsNaN(s.MinT) || math.IsNaN(s.MaxT) {
		return nil, fmt.Errorf("--min and --max must be numbers")
	}
	solver := Dedicated
	if s.Gonum {
		solver = Gonum
	}
	return info.make(s, Method(s.Method), solver), nil
}
