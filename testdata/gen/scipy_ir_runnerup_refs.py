#!/usr/bin/env python3
"""Noisy magnitude inversion-recovery voxels with the global least-squares
fit of |a + b*exp(-TI/T1)| found by scipy, for fit/inversion_test.go
(TestIRRunnerUp).

Run with Debian's python3-scipy 1.10.1 and python3-numpy 1.24:

    /usr/bin/python3 testdata/gen/scipy_ir_runnerup_refs.py > testdata/reference/scipy_ir_runnerup.json

Voxels: 8 inversion times 50..4000 ms, T1 log-uniform in 150..4000 ms,
inversion efficiency 0.6..1 (b = -2*eff*a, a = 1000), SNR a/sigma
log-uniform in 10..200, Rician noise (magnitude of complex Gaussian noise),
seeded numpy default_rng. Near the null of the recovery the sign of a small
sample is ambiguous at this noise: both polarity splits next to it give
similar costs, and only fitting both can tell which is lower.

Reference per voxel: every polarity split j = 0..8 (the first j samples
negated) gives a start, the best (a, b) by linear least squares over a
log-spaced T1 grid of 400 values from 10 to 12000 ms (the reduced-dimension
search of Barral et al., MRM 2010;64:1057, computed here independently);
each start is polished with scipy.optimize.curve_fit on the magnitude model
|a + b*exp(-TI/T1)| (Levenberg-Marquardt, MINPACK); the lowest residual sum
of squares over all nine starts is kept ("rss", "T1", "a", "b"), together
with the second-lowest cost of a different minimum ("rss_other", "T1_other";
null when all starts end at the same minimum).
"""
import json
import sys
import warnings

import numpy as np
import scipy
from scipy.optimize import OptimizeWarning, curve_fit

TI = np.array([50.0, 150.0, 300.0, 600.0, 1000.0, 1500.0, 2500.0, 4000.0])
GRID = np.geomspace(10.0, 12000.0, 400)


def mag(ti, a, b, r):
    return np.abs(a + b * np.exp(-ti * r))


def start(y, j):
    s = y.copy()
    s[:j] = -s[:j]
    best = None
    for t1 in GRID:
        e = np.exp(-TI / t1)
        x = np.column_stack([np.ones_like(e), e])
        coef, *_ = np.linalg.lstsq(x, s, rcond=None)
        cost = float(np.sum((x @ coef - s) ** 2))
        if best is None or cost < best[0]:
            best = (cost, coef[0], coef[1], 1 / t1)
    return best[1:]


def main():
    rng = np.random.default_rng(20261203)
    voxels = []
    n = 1500
    for v in range(n):
        t1 = 150 * (4000 / 150) ** rng.random()
        eff = 0.6 + 0.4 * rng.random()
        snr = 10 * 20 ** rng.random()
        sigma = 1000 / snr
        s = 1000 - 2 * eff * 1000 * np.exp(-TI / t1)
        y = np.hypot(s + rng.normal(0, sigma, 8), rng.normal(0, sigma, 8))
        y = np.round(y, 6)
        fits = []
        for j in range(9):
            a0, b0, r0 = start(y, j)
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore", OptimizeWarning)
                    p, _ = curve_fit(mag, TI, y, p0=[a0, b0, r0], method="lm",
                                     ftol=1e-15, xtol=1e-15, gtol=0, maxfev=20000)
            except RuntimeError:
                continue
            if not (p[2] > 0):
                continue
            a, b, r = p
            if a < 0:
                a, b = -a, -b
            fits.append((float(np.sum((mag(TI, *p) - y) ** 2)), 1 / r, a, b))
        fits.sort()
        best = fits[0]
        other = next((f for f in fits[1:] if abs(f[1] - best[1]) > 1e-4 * best[1]), None)
        voxels.append({
            "signal": [float(x) for x in y],
            "true_T1": round(float(t1), 3), "snr": round(float(snr), 3),
            "rss": best[0], "T1": best[1], "a": best[2], "b": best[3],
            "rss_other": other[0] if other else None,
            "T1_other": other[1] if other else None,
        })
    json.dump({
        "source": "scipy.optimize.curve_fit(method='lm') %s from every polarity split, numpy %s; "
                  "script testdata/gen/scipy_ir_runnerup_refs.py" % (scipy.__version__, np.__version__),
        "ti_ms": [float(x) for x in TI],
        "voxels": voxels,
    }, sys.stdout, separators=(",", ":"))
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
