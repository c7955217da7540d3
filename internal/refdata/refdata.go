// Package refdata reads the reference vectors committed in
// testdata/reference, each made by the script in testdata/gen named
// beside it, for the tests of every package that checks against them (one
// reader of each file's layout instead of a copy per test).
package refdata

import (
	"encoding/json"
	"fmt"
	"os"
)

// ScipyT2 is testdata/reference/scipy_t2.json: noisy mono-exponential
// signals fitted by scipy.optimize.curve_fit (scipy 1.10.1, method 'lm';
// script testdata/gen/scipy_t2_refs.py), with the fits' estimates and
// √diag(pcov), and scipy.stats.rice means.
type ScipyT2 struct {
	TE    []float64     `json:"te_ms"`
	Cases []ScipyT2Case `json:"cases"`
	Rice  []struct {
		A, Mean float64
	} `json:"rice_mean_sigma1"`
}

// ScipyT2Case is one signal and curve_fit's result for it.
type ScipyT2Case struct {
	Offset      bool      `json:"offset"` // fitted with a constant offset
	Sigma       float64   `json:"sigma"`  // Rician noise-floor model's σ (0: plain)
	Signal      []float64 `json:"signal"`
	M0          float64   `json:"M0"`
	T2          float64   `json:"T2"`
	OffsetValue float64   `json:"offset_value"`
	SeT2        float64   `json:"se_T2"`
	SeM0        float64   `json:"se_M0"`
}

// ReadScipyT2 reads scipy_t2.json at path.
func ReadScipyT2(path string) (*ScipyT2, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var r ScipyT2
	if err := json.Unmarshal(raw, &r); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return &r, nil
}

// Plain returns the cases fitted without an offset or a noise floor.
func (r *ScipyT2) Plain() []ScipyT2Case {
	var out []ScipyT2Case
	for _, c := range r.Cases {
		if !c.Offset && c.Sigma == 0 {
			out = append(out, c)
		}
	}
	return out
}
