package fit

import (
	"math"

	"github.com/tauvox/tauvox/volume"
)

// registry lists every model tauvox fits, in the order help shows them.
// Adding a model is its file (the Model and its Fitter) and one entry
// here; see DEVELOPERS.md.
var registry = []ModelInfo{
	{
		Name: "t2", Methods: []string{"nlls", "loglinear"}, Needs: "EchoTime", Sequence: SeqSpinEcho, Suggest: true,
		Summary: "multi-echo spin echo, S = M0·exp(−TE/T2) [+ c]",
		Options: []string{"offset", "noise", "sigma"}, Suffixes: []string{"MESE"},
		Reference: "Mono-exponential fit of a multi-echo spin-echo train (Carr & Purcell 1954; Meiboom & Gill 1958); see tauvox docs/methods.md",
		Simulate: &Protocol{Summary: "multi-echo spin echo, 16 echoes TE 10…160 ms, TR 4000 ms", Seq: SeqSpinEcho, Acq: func() []volume.Acquisition {
			return protocol(16, func(i int, a *volume.Acquisition) {
				a.EchoTime, a.RepetitionTime, a.FlipAngle = 10*float64(i+1), 4000, 90
			})
		}, Truth: "20:20:300"},
		make: func(s Spec, meth Method, solver Solver) Model {
			return &MonoExp{Estimator: meth, Offset: s.Offset, Sigma: s.Sigma, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
		},
		Help: `S(TE) = M0·exp(−TE/T2) [+ c] (Carr & Purcell 1954; Meiboom & Gill 1958).
Assumes ideal 180° refocusing: imperfect refocusing adds stimulated echoes and
biases T2 upwards (use t2-epg, or --offset / --skip-echoes to reduce it).
nlls: Levenberg–Marquardt from the log-linear start; loglinear: weighted
linear fit of ln S (biased at low SNR). --sigma fits the Rician mean of the
magnitude (noise floor of late echoes).
Outputs: T2map (ms), R2map (1/s), M0map; with --offset, offset.`,
	},
	{
		Name: "t2star", Methods: []string{"nlls", "loglinear", "arlo"}, Needs: "EchoTime", Sequence: SeqGradientEcho, Suggest: true,
		Summary: "multi-echo gradient echo, S = M0·exp(−TE/T2*) [+ c]",
		Options: []string{"offset", "noise", "sigma"}, Suffixes: []string{"MEGRE"},
		Reference: "Mono-exponential fit of a multi-echo gradient-echo train (common practice); see tauvox docs/methods.md",
		Simulate: &Protocol{Summary: "multi-echo gradient echo, 12 echoes TE 3…36 ms, TR 60 ms, 20°", Seq: SeqGradientEcho, Acq: func() []volume.Acquisition {
			return protocol(12, func(i int, a *volume.Acquisition) { a.EchoTime, a.RepetitionTime, a.FlipAngle = 3*float64(i+1), 60, 20 })
		}, Truth: "5:5:60"},
		make: func(s Spec, meth Method, solver Solver) Model {
			return &MonoExp{Star: true, Estimator: meth, Offset: s.Offset, Sigma: s.Sigma, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
		},
		Help: `S(TE) = M0·exp(−TE/T2*) [+ c], the same decay on gradient echoes.
nlls and loglinear as for t2; arlo: auto-regression on linear operations
(Pei et al. 2015), T2* = Σx·d/Σd² from Simpson's rule over pairs of echo
spacings, closed form, needs ≥ 3 evenly spaced echoes; slightly low on noisy
data. --sigma fits the Rician noise floor (nlls).
Outputs: T2starmap (ms), R2starmap (1/s), M0map; with --offset, offset.`,
	},
	{
		Name: "t1-ir", Methods: []string{"rdnls", "nlls"}, Needs: "InversionTime", Sequence: SeqInversionRecovery, Suggest: true,
		Summary: "magnitude inversion recovery, |a + b·exp(−TI/T1)|, polarity restored",
		Options: []string{}, Suffixes: []string{"IRT1"},
		Reference: "Barral JK et al. A robust methodology for in vivo T1 mapping. Magn Reson Med 2010;64(4):1057-1067. doi:10.1002/mrm.22497",
		Simulate: &Protocol{Summary: "inversion recovery spin echo, 8 TIs 50…3200 ms, TR 8000 ms, TE 10 ms", Seq: SeqInversionRecovery, Acq: func() []volume.Acquisition {
			ti := []float64{50, 100, 200, 400, 700, 1100, 1800, 3200}
			return protocol(len(ti), func(i int, a *volume.Acquisition) {
				a.InversionTime, a.RepetitionTime, a.EchoTime, a.FlipAngle = ti[i], 8000, 10, 90
			})
		}, Truth: "200:200:3000"},
		make: func(s Spec, meth Method, solver Solver) Model {
			return &InversionRecovery{Estimator: meth, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
		},
		Help: `|S(TI)| = |a + b·exp(−TI/T1)| (Barral et al. 2010): absorbs an imperfect
inversion and a finite TR. rdnls: grid search on T1 with (a, b) in closed form
for every polarity split, then Levenberg–Marquardt; nlls: the same start,
then the magnitude model directly. Samples in any TI order.
Outputs: T1map (ms), R1map (1/s), M0map (= a), inveff (−b/(2a)).`,
	},
	{
		Name: "t1-vfa", Methods: []string{"linear", "nlls"}, Needs: "FlipAngle", Sequence: SeqGradientEcho, Suggest: true,
		Summary: "variable flip angle spoiled gradient echo (DESPOT1), optional B1 map",
		Options: []string{"b1"}, Suffixes: []string{"VFA"},
		Reference: "Fram EK et al. Magn Reson Imaging 1987;5(3):201-208; Deoni SCL, Rutt BK, Peters TM. Magn Reson Med 2003;49:515-526",
		Simulate: &Protocol{Summary: "spoiled gradient echo, flip angles 2…30°, TR 15 ms, TE 2 ms", Seq: SeqGradientEcho, Acq: func() []volume.Acquisition {
			fa := []float64{2, 5, 10, 15, 20, 30}
			return protocol(len(fa), func(i int, a *volume.Acquisition) { a.FlipAngle, a.RepetitionTime, a.EchoTime = fa[i], 15, 2 })
		}, Truth: "200:200:2000"},
		make: func(s Spec, meth Method, solver Solver) Model {
			return &VariableFlipAngle{Estimator: meth, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
		},
		Help: `S(α) = M0·sin α·(1 − E1)/(1 − E1·cos α), E1 = exp(−TR/T1) (Ernst; Fram et
al. 1987; Deoni et al. 2003). Assumes ideal spoiling and one TR; the
effective angle is B1·α with --b1 (ignoring B1 scales T1 by about B1²).
linear: DESPOT1 regression; nlls: Levenberg–Marquardt from it.
Outputs: T1map (ms), R1map (1/s), M0map.`,
	},
	{
		Name: "t1-sr", Methods: []string{"nlls"}, Needs: "RepetitionTime", Sequence: SeqSaturationRecovery, Suggest: true,
		Summary: "saturation recovery / variable TR, M0·(1 − k·exp(−TR/T1))",
		Options: []string{"efficiency"}, Suffixes: []string{},
		Reference: "Saturation recovery M0·(1 − k·exp(−TR/T1)) (textbook form, common practice); see tauvox docs/methods.md",
		Simulate: &Protocol{Summary: "saturation recovery, 7 TRs 100…6400 ms, TE 10 ms", Seq: SeqSaturationRecovery, Acq: func() []volume.Acquisition {
			return protocol(7, func(i int, a *volume.Acquisition) {
				a.RepetitionTime, a.EchoTime, a.FlipAngle = 100*math.Pow(2, float64(i)), 10, 90
			})
		}, Truth: "200:200:3000"},
		make: func(s Spec, meth Method, solver Solver) Model {
			return &SaturationRecovery{Efficiency: s.Efficiency, Estimator: meth, MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
		},
		Help: `S(TR) = M0·(1 − k·exp(−TR/T1)), k = 1 for an ideal saturation; with
--efficiency k is fitted. Grid search on T1 with M0 (and k) in closed form,
then Levenberg–Marquardt.
Outputs: T1map (ms), R1map (1/s), M0map; with --efficiency, sateff.`,
	},
	{
		Name: "t1-ll", Methods: []string{"rdnls"}, Needs: "InversionTime", Sequence: SeqInversionRecovery, Suggest: false,
		Summary: "Look-Locker, |A − B·exp(−t/T1*)|, T1 = T1*·(B/A − 1)",
		Options: []string{}, Suffixes: []string{},
		Reference: "Deichmann R, Haase A. Quantification of T1 values by SNAPSHOT-FLASH NMR imaging. J Magn Reson 1992;96:608-612",
		Simulate:  nil,
		make: func(s Spec, meth Method, solver Solver) Model {
			return &LookLocker{MinT: s.MinT, MaxT: s.MaxT, Solver: solver}
		},
		Help: `|S(t)| = |A − B·exp(−t/T1*)|, T1 = T1*·(B/A − 1) (Deichmann & Haase
1992). t is each frame's time after the inversion, read as InversionTime.
The correction assumes continuous FLASH readouts with TR ≪ T1 (about −1 % at
T1 1000 ms, TR 5 ms, 10°). Fitted like t1-ir (grid search with polarity
restoration, then Levenberg–Marquardt); SEs by the delta method.
Outputs: T1map, T1starmap (ms), llA (A), llBA (B/A; 2 for a perfect inversion).`,
	},
	{
		Name: "t2-epg", Methods: []string{"nlls", "dictionary"}, Needs: "EchoTime", Sequence: SeqSpinEcho, Suggest: false,
		Summary: "stimulated-echo corrected multi-echo spin echo (EPG), fits T2, B1, M0",
		Options: []string{"t1", "refocus", "b1", "noise", "sigma"}, Suffixes: []string{},
		Reference: "Lebel RM, Wilman AH. Transverse relaxometry with stimulated echo compensation. Magn Reson Med 2010;64(4):1005-1014",
		Simulate:  nil,
		make: func(s Spec, meth Method, solver Solver) Model {
			return &StimulatedEcho{Estimator: meth, T1: s.T1Fixed, RefocusAngle: s.RefocusAngle, MinT: s.MinT, MaxT: s.MaxT, Sigma: s.Sigma, Solver: solver}
		},
		Help: `S_k = M0·EPG_k(T2, T1, B1·α_nominal, ESP): the extended-phase-graph echo
train of a CPMG (Hennig 1988; Weigel 2015), fitting T2, B1 and M0 (Lebel &
Wilman 2010); with --b1, B1 is taken from the map and only T2, M0 are fitted.
Echoes must be TE = k·ESP of one train. T1 fixed (--t1, default 1000 ms),
α_nominal --refocus (default 180°). No slice profile. The train is symmetric
about 180°, so B1 is folded to at most 180°/α_nominal. nlls: dictionary
search over T2 × B1, then Levenberg–Marquardt on the exact EPG with analytic
derivatives; dictionary: the best entry only. --sigma: Rician noise floor.
Outputs: T2map (ms), B1map (ratio), M0map.`,
	},
	{
		Name: "t2-spectrum", Methods: []string{"nnls"}, Needs: "EchoTime", Sequence: SeqSpinEcho, Suggest: false,
		Summary: "multi-component T2 spectrum (regularised NNLS), myelin water fraction",
		Options: []string{"t1", "window", "epg-basis"}, Suffixes: []string{},
		Reference: "Whittall KP, MacKay AL. Quantitative interpretation of NMR relaxation data. J Magn Reson 1989;84:134-152",
		Simulate:  nil,
		make: func(s Spec, meth Method, solver Solver) Model {
			return &Spectrum{MinT: s.MinT, MaxT: s.MaxT, Window: s.Window, EPGBasis: s.EPGBasis, T1: s.T1Fixed}
		},
		Help: `y_i = Σ_j s_j·K(t_i; T2_j), s ≥ 0, on 60 log-spaced T2 from 3 ms to 2 s
(Whittall & MacKay 1989): Lawson–Hanson NNLS with Tikhonov regularisation,
μ per voxel such that χ² = 1.02·χ²_min. --epg-basis uses EPG echo trains
with the refocusing angle chosen per voxel by the unregularised misfit
(Prasloski et al. 2012). --window sets the short window (default T2 < 40 ms).
No standard errors (NaN).
Outputs: MWFmap (percent of the spectrum in the short window), T2short and
T2long (geometric-mean T2 of each window, ms), M0map (Σs); with the EPG
basis, refocusangle (degrees).`,
	},
	{
		Name: "b1-dam", Methods: []string{"ratio"}, Needs: "FlipAngle", Sequence: SeqGradientEcho, Suggest: false,
		Summary: "double-angle B1 map: flip angles α and 2α, full recovery, θ = arccos(S(2α)/2S(α))",
		Options: []string{}, Suffixes: []string{},
		Reference: "Insko EK, Bolinger L. Mapping of the radiofrequency field. J Magn Reson A 1993;103(1):82-85",
		Simulate: &Protocol{Summary: "gradient echo, flip angles 60° and 120°, TR 10000 ms, TE 2 ms", Seq: SeqGradientEcho, Acq: func() []volume.Acquisition {
			fa := []float64{60, 120}
			return protocol(len(fa), func(i int, a *volume.Acquisition) { a.FlipAngle, a.RepetitionTime, a.EchoTime = fa[i], 10000, 2 })
		}},
		make: func(s Spec, meth Method, solver Solver) Model { return &DoubleAngle{} },
		Help: `S(α) = M0·sin(B1·α) with full recovery (TR ≥ 5·T1); S(2α)/S(α) = 2·cos θ,
θ = arccos(S(2α)/(2·S(α))), B1 = θ/α (Insko & Bolinger 1993). Two volumes at
α and 2α (α < 90°; unambiguous for B1·α ≤ 90°). --min/--max do not apply.
Outputs: TB1map (percent of the nominal angle), for fit --b1.`,
	},
	{
		Name: "b1-afi", Methods: []string{"ratio"}, Needs: "RepetitionTime", Sequence: SeqGradientEcho, Suggest: false,
		Summary: "actual flip-angle imaging B1 map: one angle, interleaved TR1 < TR2",
		Options: []string{}, Suffixes: []string{},
		Reference: "Yarnykh VL. Actual flip-angle imaging in the pulsed steady state: a method for rapid three-dimensional mapping of the transmitted radiofrequency field. Magn Reson Med 2007;57(1):192-200. doi:10.1002/mrm.21120",
		Simulate:  nil,
		make:      func(s Spec, meth Method, solver Solver) Model { return &ActualFlipAngle{} },
		Help: `Two images of one flip angle α in the TR1 and TR2 intervals of an interleaved
pair (n = TR2/TR1 > 1, ideal spoiling, TR ≪ T1): r = S2/S1,
θ = arccos((r·n − 1)/(n − r)), B1 = θ/α (Yarnykh 2007). The TR ≪ T1
approximation biases B1 low by < 0.5 % for T1 ≥ 1000 ms at TR 20/100 ms.
--min/--max do not apply.
Outputs: TB1map (percent of the nominal angle), for fit --b1.`,
	},
}

// protocol makes n volumes of unknown parameters and lets set fill each.
func protocol(n int, set func(i int, a *volume.Acquisition)) []volume.Acquisition {
	acq := make([]volume.Acquisition, n)
	for i := range acq {
		acq[i] = volume.Unknown()
		set(i, &acq[i])
	}
	return acq
}
