#!/usr/bin/env python3
"""Reference fits of the mono-exponential decay S = M0*exp(-TE/T2) [+ c]
made with scipy.optimize.curve_fit (Levenberg-Marquardt, MINPACK lmder).

Run with Debian's python3-scipy 1.10.1 and python3-numpy 1.24:

    /usr/bin/python3 testdata/gen/scipy_t2_refs.py > testdata/reference/scipy_t2.json

The Go test fit/monoexp_test.go (TestMonoExpAgreesWithScipy) reads the JSON
and requires tauvox's NLLS estimates to agree to 1e-4 relative.
"""
import json
import sys

import numpy as np
import scipy
from scipy.optimize import curve_fit
from scipy.special import i0e, i1e


def mono(te, m0, t2):
    return m0 * np.exp(-te / t2)


def mono_off(te, m0, t2, c):
    return m0 * np.exp(-te / t2) + c


def rice_mean(a, sigma):
    # E[M] of a Rician magnitude, scaled-Bessel form (check-values 1.4);
    # equals scipy.stats.rice(b=a/sigma, scale=sigma).mean().
    x = a * a / (4 * sigma * sigma)
    return sigma * np.sqrt(np.pi / 2) * ((1 + 2 * x) * i0e(x) + 2 * x * i1e(x))


def rician(rng, s, sigma):
    return np.hypot(s + rng.normal(0, sigma, s.shape), rng.normal(0, sigma, s.shape))


def main():
    rng = np.random.default_rng(20261201)
    te = np.arange(1, 17) * 10.0  # 16 echoes, 10..160 ms
    cases = []
    for offset in (False, True):
        for t2 in (20.0, 45.0, 80.0, 150.0, 300.0):
            for rep in range(4):
                m0 = 1000.0
                sigma = m0 / 100.0  # SNR 100 at TE = 0
                y = rician(rng, mono(te, m0, t2) + (30.0 if offset else 0.0), sigma)
                if offset:
                    p, cov = curve_fit(mono_off, te, y, p0=[y[0], 50.0, 0.0], method="lm",
                                       ftol=1e-14, xtol=1e-14, gtol=0, maxfev=100000)
                else:
                    p, cov = curve_fit(mono, te, y, p0=[y[0], 50.0], method="lm",
                                       ftol=1e-14, xtol=1e-14, gtol=0, maxfev=100000)
                se = np.sqrt(np.diag(cov))
                cases.append({
                    "offset": offset,
                    "true_T2": t2,
                    "signal": [float(v) for v in y],
                    "M0": float(p[0]), "T2": float(p[1]),
                    "offset_value": float(p[2]) if offset else 0.0,
                    "se_M0": float(se[0]), "se_T2": float(se[1]),
                })
    # Noise-floor aware fits: the expected Rician magnitude with known sigma.
    sigma = 10.0
    for t2 in (20.0, 35.0, 60.0, 120.0):
        for rep in range(3):
            y = rician(rng, mono(te, 1000.0, t2), sigma)
            model = lambda t, m0, tt: rice_mean(mono(t, m0, tt), sigma)
            p, cov = curve_fit(model, te, y, p0=[y[0], 50.0], method="lm",
                               ftol=1e-14, xtol=1e-14, gtol=0, maxfev=100000)
            se = np.sqrt(np.diag(cov))
            cases.append({
                "offset": False, "sigma": sigma, "true_T2": t2,
                "signal": [float(v) for v in y],
                "M0": float(p[0]), "T2": float(p[1]), "offset_value": 0.0,
                "se_M0": float(se[0]), "se_T2": float(se[1]),
            })
    # Check of the Rician mean against scipy.stats.rice (check-values 2.2).
    from scipy.stats import rice
    rice_check = [{"A": a, "mean": float(rice(b=a, scale=1.0).mean())} for a in (0.0, 0.5, 1.0, 2.0, 3.0, 5.0, 10.0, 20.0)]
    json.dump({
        "rice_mean_sigma1": rice_check,
        "source": "scipy.optimize.curve_fit(method='lm') %s, numpy %s; script testdata/gen/scipy_t2_refs.py" % (scipy.__version__, np.__version__),
        "te_ms": [float(v) for v in te],
        "cases": cases,
    }, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
