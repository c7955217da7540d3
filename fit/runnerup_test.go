package fit

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// TestIRRunnerUp: 1500 committed noisy voxels (Rician, SNR 10–200, T1
// 150–4000 ms, inversion efficiency 0.6–1; testdata/gen/
// scipy_ir_runnerup_refs.py) with the lowest magnitude cost that
// scipy.optimize.curve_fit finds when started from every polarity split.
//
// The runner-up step (both best splits polished when their grid costs are
// within irRunnerUp; 0 turns it off) must matter on this committed case:
// turned off, at least one voxel changes T1 (by more than 1e-6 relative),
// every changed voxel then has a higher cost than with the step, and with
// the step each of them reaches scipy's minimum (RSS within 1e-11
// relative). Observed: 4 voxels change, T1 by 0.7–4 %.
//
// With the step, the fit reaches scipy's minimum (RSS within 1e-11, T1
// within 3e-6 relative: about 15 and 4 times the observed worst, 7e-13
// and 7e-7, which are logged) on all but at most 4 of the
// voxels whose scipy T1 lies within the model's bounds (1–10000 ms):
// observed exactly 4 misses: voxels 365 and 505 (SNR 10–11) from the
// coarse-to-fine grid (the exhaustive grid, irCoarse = 1, finds scipy's
// minimum there), voxels 253 and 896 where neither of the two best splits
// leads to the lowest minimum. The bound is the observed count, so the
// test fails if the search gets worse (turning the step off gives 8).
func TestIRRunnerUp(t *testing.T) {
	raw, err := os.ReadFile("../testdata/reference/scipy_ir_runnerup.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Source string    `json:"source"`
		TI     []float64 `json:"ti_ms"`
		Voxels []struct {
			Signal []float64 `json:"signal"`
			TrueT1 float64   `json:"true_T1"`
			SNR    float64   `json:"snr"`
			RSS    float64   `json:"rss"`
			T1     float64   `json:"T1"`
		} `json:"voxels"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	m := &InversionRecovery{}
	f := t1Fitter(t, m, tiAcq(ref.TI))
	res := NewResult(m)
	defer func(v float64) { irRunnerUp = v }(irRunnerUp)
	run := func() (t1, rss []float64) {
		for _, v := range ref.Voxels {
			f.Fit(res, v.Signal, Covariates{})
			t1, rss = append(t1, res.Values[0]), append(rss, res.RSS)
		}
		return t1, rss
	}
	atMin := func(rss, scipy float64) bool { return rss <= scipy*(1+1e-11) }
	t1, rss := run()
	var worstRSS, worstT1 float64
	inBounds, misses := 0, 0
	for i, v := range ref.Voxels {
		if !(v.T1 >= 1 && v.T1 <= 10000) {
			continue
		}
		inBounds++
		if !atMin(rss[i], v.RSS) {
			misses++
			t.Logf("voxel %d (T1 %.0f, SNR %.0f): T1 %.6g RSS %.8g, scipy's minimum T1 %.6g RSS %.8g", i, v.TrueT1, v.SNR, t1[i], rss[i], v.T1, v.RSS)
			continue
		}
		worstRSS = math.Max(worstRSS, (rss[i]-v.RSS)/v.RSS)
		worstT1 = math.Max(worstT1, relErr(t1[i], v.T1))
		if relErr(t1[i], v.T1) > 3e-6 {
			t.Errorf("voxel %d: T1 %.8g, scipy %.8g at the same cost", i, t1[i], v.T1)
		}
	}
	t.Logf("%s: %d voxels, %d with scipy's T1 in bounds; %d miss scipy's minimum; the others within %.1e relative in RSS, %.1e in T1",
		ref.Source, len(ref.Voxels), inBounds, misses, worstRSS, worstT1)
	if misses > 4 {
		t.Errorf("%d of %d voxels miss scipy's minimum cost, at most 4 expected", misses, inBounds)
	}

	irRunnerUp = 0
	t1Off, rssOff := run()
	changed := 0
	for i, v := range ref.Voxels {
		if !(relErr(t1Off[i], t1[i]) > 1e-6) {
			continue
		}
		changed++
		t.Logf("runner-up step off, voxel %d (T1 %.0f, SNR %.0f): T1 %.6g RSS %.8g; with the step T1 %.6g RSS %.8g; scipy T1 %.6g RSS %.8g",
			i, v.TrueT1, v.SNR, t1Off[i], rssOff[i], t1[i], rss[i], v.T1, v.RSS)
		if !(rssOff[i] > rss[i]) || !atMin(rss[i], v.RSS) {
			t.Errorf("voxel %d: the runner-up step moved the fit from RSS %.8g to %.8g (scipy's minimum %.8g)", i, rssOff[i], rss[i], v.RSS)
		}
	}
	if changed == 0 {
		t.Error("the runner-up step changes no committed voxel: the case does not exercise it")
	}
}
