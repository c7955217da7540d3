#!/usr/bin/env python3
"""Reference CPMG echo trains from an isochromat Bloch simulation, the
independent check of tauvox's extended-phase-graph code (fit/epg.go).

Run with Debian's python3-numpy 1.24:

    /usr/bin/python3 testdata/gen/epg_refs.py > testdata/reference/epg_isochromat.json

The sequence is that of check-values 1.2: an ideal 90 degree pulse about y,
then n times [free precession and relaxation for ESP/2, refocusing by alpha
about x, free precession and relaxation for ESP/2, read the echo]. N
isochromats share the voxel; the crusher/readout gradient dephases isochromat
j by 2*pi*j/N in each half interval. Relaxation: Mxy -> E2*Mxy,
Mz -> E1*Mz + (1 - E1) (T1 regrowth included). The echo is |mean(Mx + i*My)|.

With uniformly spaced dephasing the discrete mean of exp(i*k*phi_j) over the
N isochromats vanishes exactly unless k is a multiple of N, so for N larger
than the highest dephasing order of the train (2n) the simulation equals the
continuous dephasing integral to rounding; N = 3600 (as in check-values 2.1)
is far above that.
"""
import json
import math

import numpy as np

N_ISO = 3600


def rot_x(a):
    c, s = math.cos(a), math.sin(a)
    return np.array([[1, 0, 0], [0, c, -s], [0, s, c]])


def rot_y(a):
    c, s = math.cos(a), math.sin(a)
    return np.array([[c, 0, s], [0, 1, 0], [-s, 0, c]])


def cpmg(alpha_deg, esp, t1, t2, n):
    phi = 2 * np.pi * np.arange(N_ISO) / N_ISO
    cp, sp = np.cos(phi), np.sin(phi)
    m = np.zeros((3, N_ISO))
    m[2] = 1.0
    m = rot_y(math.pi / 2) @ m
    tau = esp / 2
    e1 = 0.0 if t1 == 0 else (1.0 if math.isinf(t1) else math.exp(-tau / t1))
    e2 = 1.0 if math.isinf(t2) else math.exp(-tau / t2)
    r = rot_x(alpha_deg * math.pi / 180)

    def half(m):
        x = cp * m[0] - sp * m[1]
        y = sp * m[0] + cp * m[1]
        return np.array([e2 * x, e2 * y, e1 * m[2] + (1 - e1)])

    echoes = []
    for _ in range(n):
        m = half(m)
        m = r @ m
        m = half(m)
        echoes.append(float(abs(np.mean(m[0] + 1j * m[1]))))
    return echoes


def main():
    cases = []
    inf = float("inf")
    for alpha, esp, t1, t2, n in [
        (180, 10, 1000, 100, 10),
        (150, 10, inf, inf, 10),
        (120, 10, inf, inf, 10),
        (90, 10, inf, inf, 10),
        (60, 10, inf, inf, 10),
        (150, 10, 1000, 100, 10),
        (120, 10, 1000, 100, 10),
        (90, 10, 1000, 100, 10),
        (60, 10, 1000, 100, 10),
        (135, 7, 800, 40, 32),
        (165, 12, 1500, 250, 24),
        (110, 5, 300, 20, 32),
    ]:
        cases.append({
            "alpha_deg": alpha, "esp_ms": esp,
            "t1_ms": t1 if not math.isinf(t1) else None,
            "t2_ms": t2 if not math.isinf(t2) else None,
            "echoes": cpmg(alpha, esp, t1, t2, n),
        })
    out = {
        "source": "isochromat Bloch simulation, testdata/gen/epg_refs.py, numpy " + np.__version__,
        "isochromats": N_ISO,
        "cases": cases,
    }
    json.dump(out, fp=__import__("sys").stdout, indent=1)
    print()


if __name__ == "__main__":
    main()
