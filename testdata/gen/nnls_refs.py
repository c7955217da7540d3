#!/usr/bin/env python3
"""Reference solutions of non-negative least squares, min ||A x - b|| with
x >= 0, from scipy.optimize.nnls (Lawson-Hanson active set, scipy 1.10.1),
for the tests of fit/nnls.go (TestNNLSAgreesWithScipy).

Run with Debian's python3-scipy 1.10.1 and python3-numpy 1.24:

    /usr/bin/python3 testdata/gen/nnls_refs.py > testdata/reference/scipy_nnls.json

Cases:
  - check-values 2.3: basis {10, 20, 40, 80, 160} ms, 32 echoes at
    ESP 10 ms, y = 0.15 exp(-t/20) + 0.85 exp(-t/80) -> s = [0, .15, 0, .85, 0];
  - random dense problems (some with active constraints);
  - two-pool decays with Rician noise on a 40-value log-spaced basis
    10 ms..2 s, unregularised and Tikhonov-regularised (stacked [K; sqrt(mu) I]).
"""
import json
import sys

import numpy as np
import scipy
from scipy.optimize import nnls


def case(name, a, b):
    x, rnorm = nnls(a, b, maxiter=100 * a.shape[1])
    return {"name": name, "rows": a.shape[0], "cols": a.shape[1],
            "a": [float(v) for v in a.ravel()], "b": [float(v) for v in b],
            "x": [float(v) for v in x], "rnorm": float(rnorm)}


def main():
    rng = np.random.default_rng(20261202)
    cases = []
    t = 10.0 * np.arange(1, 33)
    basis = np.array([10.0, 20.0, 40.0, 80.0, 160.0])
    k = np.exp(-t[:, None] / basis[None, :])
    y = 0.15 * np.exp(-t / 20) + 0.85 * np.exp(-t / 80)
    cases.append(case("check-values-2.3", k, y))
    for i in range(4):
        a = rng.normal(size=(20, 8))
        b = rng.normal(size=20)
        cases.append(case("random-%d" % i, a, b))
    for i in range(2):
        a = rng.uniform(size=(12, 15))
        b = rng.uniform(size=12)
        cases.append(case("wide-%d" % i, a, b))
    t2 = np.geomspace(10, 2000, 40)
    k = np.exp(-t[:, None] / t2[None, :])
    for i in range(3):
        clean = 0.15 * np.exp(-t / 20) + 0.85 * np.exp(-t / 80)
        s = 1 / 200
        y = np.hypot(clean + rng.normal(0, s, t.shape), rng.normal(0, s, t.shape))
        cases.append(case("two-pool-%d" % i, k, y))
        mu = 1e-2 * np.trace(k.T @ k) / k.shape[1]
        a = np.vstack([k, np.sqrt(mu) * np.eye(k.shape[1])])
        b = np.concatenate([y, np.zeros(k.shape[1])])
        cases.append(case("two-pool-reg-%d" % i, a, b))
    json.dump({"source": "scipy.optimize.nnls, scipy " + scipy.__version__ + ", testdata/gen/nnls_refs.py",
               "cases": cases}, sys.stdout, indent=0)
    print()


if __name__ == "__main__":
    main()
