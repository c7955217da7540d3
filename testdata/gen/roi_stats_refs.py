#!/usr/bin/env python3
"""Reference region statistics computed with numpy (Debian python3-numpy 1.24).

    /usr/bin/python3 testdata/gen/roi_stats_refs.py > testdata/reference/roi_stats.json

roi/stats_test.go (TestSummariseAgreesWithNumpy) feeds the same values to
roi.Summarise: mean, SD with ddof=1, median, 25th and 75th percentiles with
numpy's default linear interpolation, min, max and CoV = SD/|mean|.
"""
import json
import sys

import numpy as np

rng = np.random.default_rng(7)
cases = []
for n in (1, 2, 3, 7, 10, 64, 513):
    x = rng.normal(1000.0, 37.0, n)
    if n > 5:
        x[::5] = np.nan  # NaN entries stand for failed fits and are left out
    v = x[np.isfinite(x)]
    sd = float(np.std(v, ddof=1)) if v.size > 1 else None
    cases.append({
        "values": [None if not np.isfinite(a) else float(a) for a in x],
        "n": int(v.size),
        "mean": float(np.mean(v)),
        "sd": sd,
        "median": float(np.median(v)),
        "q1": float(np.percentile(v, 25)),
        "q3": float(np.percentile(v, 75)),
        "min": float(np.min(v)),
        "max": float(np.max(v)),
        "cov": None if sd is None else sd / abs(float(np.mean(v))),
    })
json.dump({"source": "numpy %s, script testdata/gen/roi_stats_refs.py" % np.__version__, "cases": cases}, sys.stdout, indent=1)
sys.stdout.write("\n")
