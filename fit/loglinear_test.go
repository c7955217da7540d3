package fit

import (
	"encoding/json"
	"math"
	"os"
	"testing"
)

// TestLogLinearAgreesWithScipy: the log-linear fit (MonoExp with
// Estimator LogLinear) against the weighted least-squares estimate and
// covariance (X'WX)⁻¹·s², s² = Σw·r²/(n − 2), w = S² (Draper & Smith,
// Applied Regression Analysis, 3rd ed., §9.2), computed with numpy and
// cross-checked with scipy.optimize.curve_fit(sigma = 1/S) on 41 committed
// cases (16, 12, 4 and 3 echoes; two samples that are not positive left
// out in one case; testdata/gen/scipy_loglinear_refs.py). T, R2 and M0 to
// 1e-12 relative (observed 3e-14), and their standard errors SE(T) =
// SE(R)·T², SE(R2) = 1000·SE(R), SE(M0) = M0·SE(ln M0) to 1e-8 relative
// (observed 1.7e-9: the residual sum comes from one-pass moments,
// Syy − Sxy²/Sxx, which cancel when the residuals are small). The observed
// worst differences are logged; a changed degrees of freedom moves the SEs
// by at least 3 % even with 16 echoes.
// curve_fit's own R and SE(R) (numerical Jacobian) agree to 1e-6.
func TestLogLinearAgreesWithScipy(t *testing.T) {
	raw, err := os.ReadFile("../testdata/reference/scipy_loglinear.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Source string `json:"source"`
		Cases  []struct {
			Name   string    `json:"name"`
			TE     []float64 `json:"te_ms"`
			Signal []float64 `json:"signal"`
			Used   int       `json:"used"`
			M0     float64   `json:"M0"`
			R      float64   `json:"R_per_ms"`
			T      float64   `json:"T"`
			SeR    float64   `json:"se_R_per_ms"`
			SeT    float64   `json:"se_T"`
			SeRs   float64   `json:"se_R_per_s"`
			SeM0   float64   `json:"se_M0"`
			CfR    float64   `json:"curve_fit_R_per_ms"`
			CfSeR  float64   `json:"curve_fit_se_R_per_ms"`
		} `json:"cases"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.Cases) < 30 {
		t.Fatalf("%d cases", len(ref.Cases))
	}
	const tol, tolSE = 1e-12, 1e-8
	var worstV, worstSE float64
	for _, c := range ref.Cases {
		m0, r, seR, seM0, used, ok := logLinear(c.TE, c.Signal)
		if !ok || used != c.Used {
			t.Errorf("%s: ok %v, %d samples used, reference %d", c.Name, ok, used, c.Used)
			continue
		}
		for _, p := range [][2]float64{{m0, c.M0}, {r, c.R}} {
			worstV = math.Max(worstV, relErr(p[0], p[1]))
		}
		for _, p := range [][2]float64{{seR, c.SeR}, {seM0, c.SeM0}} {
			worstSE = math.Max(worstSE, relErr(p[0], p[1]))
		}
		if relErr(m0, c.M0) > tol || relErr(r, c.R) > tol || relErr(seR, c.SeR) > tolSE || relErr(seM0, c.SeM0) > tolSE {
			t.Errorf("%s: M0 %.12g R %.12g SE(R) %.12g SE(M0) %.12g; WLS %.12g %.12g %.12g %.12g", c.Name, m0, r, seR, seM0, c.M0, c.R, c.SeR, c.SeM0)
		}
		if relErr(r, c.CfR) > 1e-6 || relErr(seR, c.CfSeR) > 1e-6 {
			t.Errorf("%s: R %.9g SE(R) %.9g, curve_fit %.9g %.9g", c.Name, r, seR, c.CfR, c.CfSeR)
		}
		// Through the fitter: the outputs T, R2, M0 and their SEs.
		m := &MonoExp{Estimator: LogLinear, Star: len(c.TE) == 12, MaxT: 5000}
		res := NewResult(m)
		mustFitter(t, m, echoes(c.TE)).Fit(res, c.Signal, Covariates{})
		if res.Status != OK {
			t.Errorf("%s: status %v", c.Name, res.Status)
			continue
		}
		want := []float64{c.T, 1000 * c.R, c.M0}
		wantSE := []float64{c.SeT, c.SeRs, c.SeM0}
		for k := range want {
			worstSE = math.Max(worstSE, relErr(res.SE[k], wantSE[k]))
			if relErr(res.Values[k], want[k]) > tol || relErr(res.SE[k], wantSE[k]) > tolSE {
				t.Errorf("%s: %s = %.12g ± %.12g, WLS %.12g ± %.12g", c.Name, m.Outputs()[k].Name, res.Values[k], res.SE[k], want[k], wantSE[k])
			}
		}
	}
	t.Logf("%s: %d cases, worst relative difference of estimates %.1e, of standard errors %.1e", ref.Source, len(ref.Cases), worstV, worstSE)
}
