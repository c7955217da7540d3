package fit

import (
	"fmt"
	"strings"
)

// Spec selects a model and its settings by name, as the command line does.
// The zero value of every field but Model selects the model's default.
type Spec struct {
	Model      string  // "t2", "t2star", "t1-ir", "t1-vfa", "t1-sr", "t1-ll", "t2-epg", "t2-spectrum"
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

// ModelInfo describes a model for help texts.
type ModelInfo struct {
	Name    string
	Methods []string // the first is the default
	Summary string
	Needs   string // the acquisition parameter that must vary
	// Help is a few lines on the model's equation, assumptions and
	// outputs, for `tauvox fit --model NAME --help`.
	Help string
}

// Models lists the models New knows.
func Models() []ModelInfo {
	return []ModelInfo{
		{Name: "t2", Methods: []string{"nlls", "loglinear"}, Summary: "multi-echo spin echo, S = M0·exp(−TE/T2) [+ c]", Needs: "EchoTime",
			Help: `S(TE) = M0·exp(−TE/T2) [+ c] (Carr & Purcell 1954; Meiboom & Gill 1958).
Assumes ideal 180° refocusing: imperfect refocusing adds stimulated echoes and
biases T2 upwards (use t2-epg, or --offset / --skip-echoes to reduce it).
nlls: Levenberg–Marquardt from the log-linear start; loglinear: weighted
linear fit of ln S (biased at low SNR). --sigma fits the Rician mean of the
magnitude (noise floor of late echoes).
Outputs: T2map (ms), R2map (1/s), M0map; with --offset, offset.`},
		{Name: "t2star", Methods: []string{"nlls", "loglinear", "arlo"}, Summary: "multi-echo gradient echo, S = M0·exp(−TE/T2*) [+ c]", Needs: "EchoTime",
			Help: `S(TE) = M0·exp(−TE/T2*) [+ c], the same decay on gradient echoes.
nlls and loglinear as for t2; arlo: auto-regression on linear operations
(Pei et al. 2015), T2* = Σx·d/Σd² from Simpson's rule over pairs of echo
spacings, closed form, needs ≥ 3 evenly spaced echoes; slightly low on noisy
data. --sigma fits the Rician noise floor (nlls).
Outputs: T2starmap (ms), R2starmap (1/s), M0map; with --offset, offset.`},
		{Name: "t1-ir", Methods: []string{"rdnls", "nlls"}, Summary: "magnitude inversion recovery, |a + b·exp(−TI/T1)|, polarity restored", Needs: "InversionTime",
			Help: `|S(TI)| = |a + b·exp(−TI/T1)| (Barral et al. 2010): absorbs an imperfect
inversion and a finite TR. rdnls: grid search on T1 with (a, b) in closed form
for every polarity split, then Levenberg–Marquardt; nlls: the same start,
then the magnitude model directly. Samples in any TI order.
Outputs: T1map (ms), R1map (1/s), M0map (= a), inveff (−b/(2a)).`},
		{Name: "t1-vfa", Methods: []string{"linear", "nlls"}, Summary: "variable flip angle spoiled gradient echo (DESPOT1), optional B1 map", Needs: "FlipAngle",
			Help: `S(α) = M0·sin α·(1 − E1)/(1 − E1·cos α), E1 = exp(−TR/T1) (Ernst; Fram et
al. 1987; Deoni et al. 2003). Assumes ideal spoiling and one TR; the
effective angle is B1·α with --b1 (ignoring B1 scales T1 by about B1²).
linear: DESPOT1 regression; nlls: Levenberg–Marquardt from it.
Outputs: T1map (ms), R1map (1/s), M0map.`},
		{Name: "t1-sr", Methods: []string{"nlls"}, Summary: "saturation recovery / variable TR, M0·(1 − k·exp(−TR/T1))", Needs: "RepetitionTime",
			Help: `S(TR) = M0·(1 − k·exp(−TR/T1)), k = 1 for an ideal saturation; with
--efficiency k is fitted. Grid search on T1 with M0 (and k) in closed form,
then Levenberg–Marquardt.
Outputs: T1map (ms), R1map (1/s), M0map; with --efficiency, sateff.`},
		{Name: "t1-ll", Methods: []string{"rdnls"}, Summary: "Look-Locker, |A − B·exp(−t/T1*)|, T1 = T1*·(B/A − 1)", Needs: "InversionTime",
			Help: `|S(t)| = |A − B·exp(−t/T1*)|, T1 = T1*·(B/A − 1) (Deichmann & Haase
1992). t is each frame's time after the inversion, read as InversionTime.
The correction assumes continuous FLASH readouts with TR ≪ T1 (about −1 % at
T1 1000 ms, TR 5 ms, 10°). Fitted like t1-ir (grid search with polarity
restoration, then Levenberg–Marquardt); SEs by the delta method.
Outputs: T1map, T1starmap (ms), llA (A), llBA (B/A; 2 for a perfect inversion).`},
		{Name: "t2-epg", Methods: []string{"nlls", "dictionary"}, Summary: "stimulated-echo corrected multi-echo spin echo (EPG), fits T2, B1, M0", Needs: "EchoTime",
			Help: `S_k = M0·EPG_k(T2, T1, B1·α_nominal, ESP): the extended-phase-graph echo
train of a CPMG (Hennig 1988; Weigel 2015), fitting T2, B1 and M0 (Lebel &
Wilman 2010); with --b1, B1 is taken from the map and only T2, M0 are fitted.
Echoes must be TE = k·ESP of one train. T1 fixed (--t1, default 1000 ms),
α_nominal --refocus (default 180°). No slice profile. The train is symmetric
about 180°, so B1 is folded to at most 180°/α_nominal. nlls: dictionary
search over T2 × B1, then Levenberg–Marquardt on the exact EPG with analytic
derivatives; dictionary: the best entry only. --sigma: Rician noise floor.
Outputs: T2map (ms), B1map (ratio), M0map.`},
		{Name: "t2-spectrum", Methods: []string{"nnls"}, Summary: "multi-component T2 spectrum (regularised NNLS), myelin water fraction", Needs: "EchoTime",
			Help: `y_i = Σ_j s_j·K(t_i; T2_j), s ≥ 0, on 60 log-spaced T2 from 3 ms to 2 s
(Whittall & MacKay 1989): Lawson–Hanson NNLS with Tikhonov regularisation,
μ per voxel such that χ² = 1.02·χ²_min. --epg-basis uses EPG echo trains
with the refocusing angle chosen per voxel by the unregularised misfit
(Prasloski et al. 2012). --window sets the short window (default T2 < 40 ms).
No standard errors (NaN).
Outputs: MWFmap (percent of the spectrum in the short window), T2short and
T2long (geometric-mean T2 of each window, ms), M0map (Σs); with the EPG
basis, refocusangle (degrees).`},
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
	case "t1-ll":
		m = &LookLocker{MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
	case "t2-epg":
		m = &StimulatedEcho{Estimator: meth, T1: s.T1Fixed, RefocusAngle: s.RefocusAngle, MinT: s.MinT, MaxT: s.MaxT, Sigma: s.Sigma, Solver: solver}
	case "t2-spectrum":
		m = &Spectrum{MinT: s.MinT, MaxT: s.MaxT, Window: s.Window, EPGBasis: s.EPGBasis, T1: s.T1Fixed}
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
		if s.Offset && s.Model != "t2" && s.Model != "t2star" {
			return nil, fmt.Errorf("--offset applies to t2 and t2star only")
		}
		if s.Sigma > 0 && s.Model != "t2" && s.Model != "t2star" && s.Model != "t2-epg" {
			return nil, fmt.Errorf("--sigma applies to t2, t2star and t2-epg only")
		}
		if s.Efficiency && s.Model != "t1-sr" {
			return nil, fmt.Errorf("--efficiency applies to t1-sr only")
		}
		if s.T1Fixed != 0 && s.Model != "t2-epg" && s.Model != "t2-spectrum" {
			return nil, fmt.Errorf("a fixed T1 applies to t2-epg and t2-spectrum only")
		}
		if s.RefocusAngle != 0 && s.Model != "t2-epg" {
			return nil, fmt.Errorf("a nominal refocusing angle applies to t2-epg only")
		}
		if (s.Window != 0 || s.EPGBasis) && s.Model != "t2-spectrum" {
			return nil, fmt.Errorf("the T2 window and the EPG basis apply to t2-spectrum only")
		}
	}
	return m, nil
}
