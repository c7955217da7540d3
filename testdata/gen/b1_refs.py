#!/usr/bin/env python3
"""Reference signals and flip angles of the two B1-mapping models, for
fit/b1_test.go (TestB1References).

Run with Debian's python3-numpy 1.24 and python3-scipy 1.10.1:

    /usr/bin/python3 testdata/gen/b1_refs.py > testdata/reference/b1.json

Double-angle method (Insko & Bolinger 1993, J Magn Reson A 103:82): with full
recovery S(a) = M0*sin(B1*a); the angle comes from S(2a)/S(a) = 2 cos(theta).
Here theta is found by scipy.optimize.brentq on sin(2t)/sin(t) - r = 0, not
by the closed form the Go code uses.

Actual flip-angle imaging (Yarnykh 2007, Magn Reson Med 57:192): the pulsed
steady state of two interleaved repetition times TR1 < TR2 with ideal
spoiling. The signals are NOT taken from the closed form (Yarnykh eq. 2) that
the Go code implements: the longitudinal magnetisation is stepped through
pulse, TR1 relaxation, pulse, TR2 relaxation until it no longer changes
(2000 pairs), and S1 = Mz(before the pulse that starts TR1)*sin(theta),
S2 = Mz(before the pulse that starts TR2)*sin(theta). The estimate is the
root (brentq) of (1 + n cos t)/(n + cos t) - S2/S1 = 0 (Yarnykh eq. 3, the
TR << T1 limit), again not the Go code's algebraic inversion (eq. 4).
"""
import json
import sys

import numpy as np
from scipy.optimize import brentq

ALPHA = 60.0  # nominal angle, degrees
M0 = 1000.0


def dam(b1):
    t = np.deg2rad(b1 * ALPHA)
    s1, s2 = abs(M0 * np.sin(t)), abs(M0 * np.sin(2 * t))
    r = s2 / s1
    theta = brentq(lambda x: np.sin(2 * x) / np.sin(x) - r, 1e-9, np.pi / 2)
    return s1, s2, np.rad2deg(theta) / ALPHA


def afi(b1, t1, tr1, tr2):
    t = np.deg2rad(b1 * ALPHA)
    e1, e2 = np.exp(-tr1 / t1), np.exp(-tr2 / t1)
    mz = M0
    for _ in range(2000):
        before1 = mz  # before the pulse that starts the TR1 interval
        mz = mz * np.cos(t) * e1 + M0 * (1 - e1)
        before2 = mz  # before the pulse that starts the TR2 interval
        mz = mz * np.cos(t) * e2 + M0 * (1 - e2)
    s1, s2 = before1 * np.sin(t), before2 * np.sin(t)
    n = tr2 / tr1
    r = s2 / s1
    theta = brentq(lambda x: (1 + n * np.cos(x)) / (n + np.cos(x)) - r, 1e-9, np.pi - 1e-9)
    return s1, s2, np.rad2deg(theta) / ALPHA


out = {"alpha_deg": ALPHA, "m0": M0, "numpy": np.__version__, "dam": [], "afi": []}
for b1 in np.arange(0.6, 1.401, 0.1):
    s1, s2, est = dam(b1)
    out["dam"].append({"b1": round(b1, 6), "s1": s1, "s2": s2, "b1_est": est})
for t1 in (300.0, 1000.0, 2500.0):
    for b1 in np.arange(0.6, 1.401, 0.1):
        s1, s2, est = afi(b1, t1, 20.0, 100.0)
        out["afi"].append({"b1": round(b1, 6), "t1_ms": t1, "tr1_ms": 20.0, "tr2_ms": 100.0, "s1": s1, "s2": s2, "b1_est": est})
json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
