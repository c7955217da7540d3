#!/usr/bin/env python3
"""Reference fits of the three T1 models of tauvox, made with
scipy.optimize.curve_fit (Levenberg-Marquardt, MINPACK lmder) and, for the
DESPOT1 linearisation, scipy.stats.linregress.

Run with Debian's python3-scipy 1.10.1 and python3-numpy 1.24 from the
repository root:

    /usr/bin/python3 testdata/gen/scipy_t1_refs.py

It writes testdata/reference/scipy_t1.json. The Go tests in fit/
(TestInversionRecoveryAgreesWithScipy, TestVFAAgreesWithScipy,
TestSaturationAgreesWithScipy) read it and require tauvox's estimates to
agree to 1e-4 relative where both converge.

Models (times in ms, angles in degrees):
  ir      |a + b*exp(-TI/T1)|                       (Barral et al. 2010)
  vfa     M0*sin(A)*(1-E1)/(1-E1*cos(A)), A = B1*alpha, E1 = exp(-TR/T1)
  sr      M0*(1 - exp(-TR/T1))
  sr_eff  M0*(1 - k*exp(-TR/T1))

Noise is Rician (magnitude of complex Gaussian noise), fixed seed.
"""
import json
import os
import sys

import numpy as np
import scipy
from scipy.optimize import curve_fit
from scipy.stats import linregress

TOL = dict(method="lm", ftol=1e-12, xtol=1e-12, gtol=1e-12, maxfev=20000)


def rician(rng, s, sigma):
    return np.hypot(s + rng.normal(0, sigma, s.shape), rng.normal(0, sigma, s.shape))


def fit(model, x, y, p0):
    """curve_fit from p0; returns (p, se, rss, ok)."""
    try:
        p, cov, info, msg, ier = curve_fit(model, x, y, p0=p0, full_output=True, **TOL)
    except RuntimeError:
        return None, None, np.inf, False
    r = y - model(x, *p)
    rss = float(r @ r)
    ok = ier in (1, 2, 3, 4) and np.all(np.isfinite(cov))
    se = np.sqrt(np.diag(cov)) if ok else None
    return p, se, rss, ok


# ---- inversion recovery -------------------------------------------------


def ir_mag(ti, a, b, t1):
    return np.abs(a + b * np.exp(-ti / t1))


def ir_cases(rng):
    # Deliberately not in TI order: the Go fitter sorts internally.
    ti = np.array([600.0, 50.0, 2500.0, 150.0, 4000.0, 300.0, 1500.0, 1000.0])
    out = []
    for i in range(40):
        t1 = rng.uniform(200, 2500)
        a = rng.uniform(500, 1500)
        eff = rng.uniform(0.85, 1.0)  # -b/(2a)
        sigma = a / (100.0 if i % 2 == 0 else 30.0)
        y = rician(rng, a - 2 * eff * a * np.exp(-ti / t1), sigma)
        best = None
        for t1s in (50.0, 150.0, 400.0, 1000.0, 2500.0, 6000.0):
            for sgn in (1.0, -1.0):
                p0 = [sgn * y.max(), -2 * sgn * y.max(), t1s]
                p, se, rss, ok = fit(ir_mag, ti, y, p0)
                if ok and p[2] > 0 and (best is None or rss < best[2]):
                    best = (p, se, rss)
        case = dict(signal=y.tolist(), truth=dict(T1=t1, a=a, inveff=eff), sigma=sigma)
        if best is None:
            case["ok"] = False
        else:
            p, se, rss = best
            aa, bb, tt = p
            if aa < 0:
                aa, bb = -aa, -bb
            case.update(ok=True, T1=tt, M0=aa, InvEff=-bb / (2 * aa), se_T1=se[2], se_M0=se[0], rss=rss)
        out.append(case)
    return dict(ti_ms=ti.tolist(), cases=out)


# ---- variable flip angle -------------------------------------------------


def vfa_cases(rng):
    fa = np.array([2.0, 5.0, 10.0, 15.0, 20.0])
    tr = 15.0
    out = []
    for i in range(40):
        t1 = rng.uniform(300, 2500)
        m0 = rng.uniform(2000, 8000)
        b1 = 1.0 if i % 2 == 0 else rng.uniform(0.8, 1.2)
        alpha = np.deg2rad(fa * b1)

        def spgr(al, m, t):
            e = np.exp(-tr / t)
            return m * np.sin(al) * (1 - e) / (1 - e * np.cos(al))

        sigma = spgr(alpha, m0, t1).max() / (100.0 if i % 4 < 2 else 40.0)
        y = rician(rng, spgr(alpha, m0, t1), sigma)
        # DESPOT1: S/sin = E1*S/tan + M0(1-E1), ordinary least squares.
        lr = linregress(y / np.tan(alpha), y / np.sin(alpha))
        case = dict(signal=y.tolist(), b1=b1, truth=dict(T1=t1, M0=m0), sigma=sigma)
        m, c = lr.slope, lr.intercept
        if 0 < m < 1:
            case["linear"] = dict(ok=True, slope=m, intercept=c, se_slope=lr.stderr, se_intercept=lr.intercept_stderr,
                                  T1=-tr / np.log(m), M0=c / (1 - m))
            p0 = [c / (1 - m), -tr / np.log(m)]
        else:
            case["linear"] = dict(ok=False)
            p0 = [y.max() * 20, 1000.0]
        p, se, rss, ok = fit(spgr, alpha, y, p0)
        if ok:
            case["nlls"] = dict(ok=True, T1=p[1], M0=p[0], se_T1=se[1], se_M0=se[0], rss=rss)
        else:
            case["nlls"] = dict(ok=False)
        out.append(case)
    return dict(flip_angle_deg=fa.tolist(), tr_ms=tr, cases=out)


# ---- saturation recovery -------------------------------------------------


def sr(t, m, t1):
    return m * (1 - np.exp(-t / t1))


def sr_eff(t, m, t1, k):
    return m * (1 - k * np.exp(-t / t1))


def sr_cases(rng, eff):
    tr = np.array([3200.0, 100.0, 800.0, 200.0, 6400.0, 400.0, 1600.0])
    out = []
    for i in range(30):
        t1 = rng.uniform(200, 2500)
        m0 = rng.uniform(500, 1500)
        k = rng.uniform(0.85, 1.0) if eff else 1.0
        sigma = m0 / (100.0 if i % 2 == 0 else 30.0)
        y = rician(rng, sr_eff(tr, m0, t1, k), sigma)
        best = None
        for t1s in (100.0, 500.0, 2000.0):
            if eff:
                p, se, rss, ok = fit(sr_eff, tr, y, [y.max(), t1s, 1.0])
            else:
                p, se, rss, ok = fit(sr, tr, y, [y.max(), t1s])
            if ok and p[1] > 0 and (best is None or rss < best[2]):
                best = (p, se, rss)
        case = dict(signal=y.tolist(), truth=dict(T1=t1, M0=m0, k=k), sigma=sigma)
        if best is None:
            case["ok"] = False
        else:
            p, se, rss = best
            case.update(ok=True, T1=p[1], M0=p[0], se_T1=se[1], se_M0=se[0], rss=rss)
            if eff:
                case.update(SatEff=p[2], se_SatEff=se[2])
        out.append(case)
    return dict(tr_ms=tr.tolist(), efficiency=eff, cases=out)


def main():
    rng = np.random.default_rng(20261202)
    doc = dict(
        source="scipy.optimize.curve_fit (method='lm', ftol=xtol=gtol=1e-12) and scipy.stats.linregress; "
               "script testdata/gen/scipy_t1_refs.py",
        scipy=scipy.__version__,
        numpy=np.__version__,
        ir=ir_cases(rng),
        vfa=vfa_cases(rng),
        sr=sr_cases(rng, False),
        sr_eff=sr_cases(rng, True),
    )
    here = os.path.dirname(os.path.abspath(__file__))
    path = os.path.join(here, "..", "reference", "scipy_t1.json")
    with open(path, "w") as f:
        json.dump(doc, f, indent=1)
        f.write("\n")
    print("wrote", os.path.normpath(path), file=sys.stderr)


if __name__ == "__main__":
    main()
