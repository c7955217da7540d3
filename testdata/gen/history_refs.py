#!/usr/bin/env python3
"""A synthetic QA history and its drift regressions, for roi/history tests.

    /usr/bin/python3 testdata/gen/history_refs.py > testdata/reference/history.json

Thirty-six sessions at uneven intervals (25-40 days apart) of one scanner;
ten vials x T1, T2. Each value is the deviation from the reference in
percent: Gaussian noise (SD 0.4) around 0, except vial A5 T1, which drifts
by -3 %/year from the first session. For every series the script records
scipy.stats.linregress's slope (percentage points per year, time in mean
Gregorian years since the first session) and its 99.73 % confidence
interval slope +/- t.ppf(1 - 0.0027/2, n-2) * stderr, the interval of
tauvox's drift rule (Debian python3-scipy 1.10.1).
"""
import datetime as dt
import json
import sys

import numpy as np
import scipy
from scipy import stats

rng = np.random.default_rng(20261201)
start = dt.datetime(2024, 1, 8, 8, 30)
dates = [start]
for _ in range(35):
    dates.append(dates[-1] + dt.timedelta(days=int(rng.integers(25, 41))))
years = np.array([(d - start).total_seconds() / (365.2425 * 86400) for d in dates])
series = []
for vial in ["A1", "A2", "A3", "A4", "A5", "A6", "A7", "A8", "B1", "B2"]:
    for q in ("T1", "T2"):
        dev = rng.normal(0.0, 0.4, len(dates))
        if vial == "A5" and q == "T1":
            dev = dev - 3.0 * years
        r = stats.linregress(years, dev)
        t = stats.t.ppf(1 - (1 - 0.9973) / 2, len(dates) - 2)
        series.append({
            "vial": vial, "quantity": q,
            "deviation_pct": [float(x) for x in dev],
            "slope": float(r.slope), "stderr": float(r.stderr),
            "ci_low": float(r.slope - t * r.stderr), "ci_high": float(r.slope + t * r.stderr),
        })
json.dump({
    "source": "numpy %s, scipy %s (stats.linregress, stats.t.ppf); script testdata/gen/history_refs.py" % (np.__version__, scipy.__version__),
    "dates": [d.strftime("%Y-%m-%d %H:%M") for d in dates],
    "series": series,
}, sys.stdout, indent=1)
sys.stdout.write("\n")
