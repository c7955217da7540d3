#!/usr/bin/env python3
"""Reference log-linear (weighted least-squares) fits of S = M0*exp(-TE/T)
with their standard errors, for fit/loglinear_test.go
(TestLogLinearAgreesWithScipy).

Run with Debian's python3-scipy 1.10.1 and python3-numpy 1.24:

    /usr/bin/python3 testdata/gen/scipy_loglinear_refs.py > testdata/reference/scipy_loglinear.json

The model is the straight line  ln S_i = ln M0 - R*TE_i  fitted with weights
w_i = S_i^2 (the variance of ln S is about sigma^2/S^2), samples that are not
positive left out. Two independent computations must agree here (asserted):

  1. the textbook weighted least-squares estimate and covariance
         beta = (X'WX)^-1 X'W l,   Cov(beta) = s^2 (X'WX)^-1,
         s^2 = sum_i w_i r_i^2 / (n - 2)
     (Draper & Smith, Applied Regression Analysis, 3rd ed. 1998, section 9.2
     "generalized and weighted least squares"; Bevington & Robinson, Data
     Reduction and Error Analysis, 3rd ed. 2003, ch. 6), with X = [1, -TE];
  2. scipy.optimize.curve_fit of the same line to ln S with sigma = 1/S and
     absolute_sigma=False, whose pcov is the same s^2 (X'WX)^-1 with n - p
     degrees of freedom (scipy documentation of curve_fit).

The JSON holds the values of 1 (exact closed form) and, for comparison,
curve_fit's R and SE(R). Derived standard errors (delta method): SE(T) = SE(R)*T^2, SE(R in 1/s) =
1000*SE(R), SE(M0) = M0*SE(ln M0).
"""
import json
import sys

import numpy as np
import scipy
from scipy.optimize import curve_fit


def line(te, lnm0, r):
    return lnm0 - r * te


def wls(te, y):
    keep = y > 0
    t, l, w = te[keep], np.log(y[keep]), y[keep] ** 2
    x = np.column_stack([np.ones_like(t), -t])
    xtwx = x.T @ (w[:, None] * x)
    beta = np.linalg.solve(xtwx, x.T @ (w * l))
    res = l - x @ beta
    n = len(t)
    s2 = float(np.sum(w * res ** 2) / (n - 2))
    cov = s2 * np.linalg.inv(xtwx)
    return beta, cov, n


def main():
    rng = np.random.default_rng(20261203)
    cases = []

    def add(name, te, y):
        beta, cov, n = wls(te, y)
        keep = y > 0
        p, pcov = curve_fit(line, te[keep], np.log(y[keep]), p0=beta, sigma=1 / y[keep],
                            absolute_sigma=False, method="lm", ftol=1e-15, xtol=1e-15, gtol=0)
        assert np.allclose(p, beta, rtol=1e-8, atol=0), (p - beta, beta)
        # curve_fit differentiates numerically (MINPACK lmdif): agreement
        # to about 1e-7 relative.
        assert np.allclose(pcov, cov, rtol=2e-6, atol=0), (pcov, cov)
        lnm0, r = beta
        se_ln, se_r = np.sqrt(np.diag(cov))
        m0, t = np.exp(lnm0), 1 / r
        cases.append({
            "name": name,
            "te_ms": [float(v) for v in te],
            "signal": [float(v) for v in y],
            "used": int(n),
            "M0": float(m0), "R_per_ms": float(r), "T": float(t),
            "se_R_per_ms": float(se_r), "se_T": float(se_r * t * t),
            "se_R_per_s": float(1000 * se_r), "se_M0": float(m0 * se_ln),
            "curve_fit_se_R_per_ms": float(np.sqrt(pcov[1, 1])),
            "curve_fit_R_per_ms": float(p[1]),
        })

    te16 = np.arange(1, 17) * 10.0
    for t2 in (20.0, 45.0, 80.0, 150.0, 300.0):
        for snr in (30.0, 100.0, 300.0):
            for rep in range(2):
                y = 1000 * np.exp(-te16 / t2) + rng.normal(0, 1000 / snr, te16.shape)
                if t2 >= 45 or np.all(y > 0):
                    add("16 echoes T2 %g SNR %g #%d" % (t2, snr, rep), te16, y)
    te4 = np.array([15.0, 30.0, 45.0, 60.0])
    for t2 in (40.0, 60.0, 100.0):
        for rep in range(3):
            add("4 echoes T2 %g #%d" % (t2, rep), te4, 1000 * np.exp(-te4 / t2) + rng.normal(0, 5, 4))
    te3 = np.array([10.0, 25.0, 40.0])
    for rep in range(3):
        add("3 echoes T2 50 #%d" % rep, te3, 1000 * np.exp(-te3 / 50) + rng.normal(0, 5, 3))
    te12 = np.arange(1, 13) * 3.0
    for t2s in (12.0, 30.0):
        for rep in range(2):
            add("T2* %g 12 echoes #%d" % (t2s, rep), te12, 800 * np.exp(-te12 / t2s) + rng.normal(0, 8, 12))
    # Samples that are not positive are left out (weight 0): fewer used.
    y = 1000 * np.exp(-te16 / 25.0) + rng.normal(0, 10, 16)
    y[12], y[15] = -3.0, 0.0
    add("16 echoes, two not positive", te16, y)

    json.dump({
        "source": "weighted least squares (X'WX)^-1 s^2 and scipy.optimize.curve_fit(sigma=1/S) %s, numpy %s; "
                  "script testdata/gen/scipy_loglinear_refs.py" % (scipy.__version__, np.__version__),
        "cases": cases,
    }, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
