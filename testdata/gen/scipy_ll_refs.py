#!/usr/bin/env python3
"""Reference fits of the Look-Locker apparent-T1 model
|S(t)| = |A - B*exp(-t/T1*)|, T1 = T1*(B/A - 1) (Deichmann & Haase 1992),
made with scipy.optimize.curve_fit (Levenberg-Marquardt, MINPACK lmder) from
several starts, the best kept.

Run with Debian's python3-scipy 1.10.1 and python3-numpy 1.24:

    /usr/bin/python3 testdata/gen/scipy_ll_refs.py > testdata/reference/scipy_ll.json

The Go test fit/looklocker_test.go (TestLookLockerAgreesWithScipy) reads the
JSON and requires tauvox's estimates to agree to 1e-4 relative. The file also
carries the exact discrete simulation of check-values 2.4 (continuous FLASH
Look-Locker, T1 = 1000 ms, TR = 5 ms, alpha = 10 deg, sampled every 20th
pulse) and its fit.
"""
import json
import math
import sys

import numpy as np
import scipy
from scipy.optimize import curve_fit


def ll(t, a, b, t1s):
    return np.abs(a - b * np.exp(-t / t1s))


def best_fit(t, y):
    best = None
    for t0 in (100.0, 300.0, 800.0, 2000.0):
        for sgn in (1.0, -1.0):
            try:
                p, cov = curve_fit(ll, t, y, p0=[sgn * y[-1], sgn * 2 * y[-1], t0], method="lm",
                                   ftol=1e-15, xtol=1e-15, gtol=0, maxfev=200000)
            except RuntimeError:
                continue
            rss = float(np.sum((ll(t, *p) - y) ** 2))
            if best is None or rss < best[0]:
                best = (rss, p, cov)
    rss, p, cov = best
    a, b, t1s = p
    if a < 0:
        a, b = -a, -b
    se = np.sqrt(np.diag(cov))
    return {"A": float(a), "B": float(b), "T1star": float(t1s), "T1": float(t1s * (b / a - 1)),
            "se_T1star": float(se[2]), "se_A": float(se[0]), "rss": rss}


def flash_ll(t1, tr, alpha_deg, npulse):
    # Mz just before each pulse after an ideal inversion; the sample of
    # pulse n (at t = n*TR) is Mz*sin(alpha).
    a = math.radians(alpha_deg)
    e1 = math.exp(-tr / t1)
    mz, out = -1.0, []
    for _ in range(npulse):
        out.append(mz * math.sin(a))
        mz = 1 - (1 - mz * math.cos(a)) * e1
    return out


def main():
    rng = np.random.default_rng(20261203)
    t = 50.0 + 150.0 * np.arange(20)
    cases = []
    for a, b, t1s in [(0.3, 0.6, 400.0), (0.25, 0.45, 900.0), (0.4, 0.78, 150.0), (0.2, 0.39, 1400.0)]:
        for rep in range(3):
            clean = ll(t, a, b, t1s)
            s = 0.005
            y = np.hypot(clean + rng.normal(0, s, t.shape), rng.normal(0, s, t.shape))
            r = best_fit(t, y)
            r.update({"signal": [float(v) for v in y], "true": [a, b, t1s]})
            cases.append(r)
    sig = flash_ll(1000.0, 5.0, 10.0, 601)
    idx = list(range(0, 601, 20))
    tf = np.array([5.0 * i for i in idx])
    yf = np.abs(np.array([sig[i] for i in idx]))
    flash = best_fit(tf, yf)
    flash.update({"t_ms": [float(v) for v in tf], "signal": [float(v) for v in yf]})
    json.dump({"source": "scipy.optimize.curve_fit, scipy " + scipy.__version__ + ", testdata/gen/scipy_ll_refs.py",
               "t_ms": [float(v) for v in t], "cases": cases, "flash": flash}, sys.stdout, indent=0)
    print()


if __name__ == "__main__":
    main()
