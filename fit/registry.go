package fit

import (
	"fmt"
	"strings"
)

// Spec selects a model and its settings by name, as the command line does.
// The zero value of every field but Model selects the model's default.
type Spec struct {
	Model      string  // "t2", "t2star", "t1-ir", "t1-vfa", "t1-sr"
	Method     string  // model-specific; "" for the default
	Offset     bool    // t2, t2star: fit a constant offset
	Sigma      float64 // t2, t2star: noise SD for the Rician noise-floor model; 0 for none
	Efficiency bool    // t1-sr: fit the saturation efficiency
	MinT, MaxT float64 // bounds of the time constant, ms; 0 for the default
	Gonum      bool    // use the gonum optimiser instead of the dedicated solver
}

// ModelInfo describes a model for help texts.
type ModelInfo struct {
	Name    string
	Methods []string // the first is the default
	Summary string
	Needs   string // the acquisition parameter that must vary
}

// Models lists the models New knows.
func Models() []ModelInfo {
	return []ModelInfo{
		{"t2", []string{"nlls", "loglinear"}, "multi-echo spin echo, S = M0·exp(−TE/T2) [+ c]", "EchoTime"},
		{"t2star", []string{"nlls", "loglinear"}, "multi-echo gradient echo, S = M0·exp(−TE/T2*) [+ c]", "EchoTime"},
		{"t1-ir", []string{"rdnls", "nlls"}, "magnitude inversion recovery, |a + b·exp(−TI/T1)|, polarity restored", "InversionTime"},
		{"t1-vfa", []string{"linear", "nlls"}, "variable flip angle spoiled gradient echo (DESPOT1), optional B1 map", "FlipAngle"},
		{"t1-sr", []string{"nlls"}, "saturation recovery / variable TR, M0·(1 − k·exp(−TR/T1))", "RepetitionTime"},
	}
}

// New returns the model a Spec names, or an error naming the valid
// choices.
func New(s Spec) (Model, error) {
	meth := Method(s.Method)
	solver := Dedicated
	if s.Gonum {
		solver = Gonum
	}
	var m Model
	switch s.Model {
	case "t2", "t2star":
		m = &MonoExp{Star: s.Model == "t2star", Estimator: meth, Offset: s.Offset, Sigma: s.Sigma, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
	case "t1-ir":
		m = &InversionRecovery{Estimator: meth, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
	case "t1-vfa":
		m = &VariableFlipAngle{Estimator: meth, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
	case "t1-sr":
		m = &SaturationRecovery{Efficiency: s.Efficiency, Estimator: meth, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
	default:
		var names []string
		for _, i := range Models() {
			names = append(names, i.Name)
		}
		return nil, fmt.Errorf("unknown model %q (choose %s)", s.Model, strings.Join(names, ", "))
	}
	for _, i := range Models() {
		if i.Name != s.Model {
			continue
		}
		ok := s.Method == ""
		for _, mm := range i.Methods {
			ok = ok || mm == s.Method
		}
		if !ok {
			return nil, fmt.Errorf("model %s has no method %q (choose %s)", s.Model, s.Method, strings.Join(i.Methods, ", "))
		}
		if (s.Offset || s.Sigma > 0) && s.Model != "t2" && s.Model != "t2star" {
			return nil, fmt.Errorf("--offset and --sigma apply to t2 and t2star only")
		}
		if s.Efficiency && s.Model != "t1-sr" {
			return nil, fmt.Errorf("--efficiency applies to t1-sr only")
		}
	}
	return m, nil
}
