#!/usr/bin/python3
"""Time several tauvox builds on one series, interleaved.

Each build runs `fit SERIES --model t2 --method M --out DIR` for M in
loglinear and nlls, build after build, --rounds times; a change of the
machine's load then touches every build alike. Printed per build: the
median wall time and the median CPU time (user + system of the process,
from getrusage of the children) of each method, and every run's CPU time.

Usage: /usr/bin/python3 testdata/gen/interleave_builds.py SERIES BIN [BIN ...]
       [--rounds 5] [--json FILE]
(docs/benchmarks.md, ".nii.gz input, second round", built one binary per
commit with `git archive COMMIT | tar -x -C DIR && go build ./cmd/tauvox`.)
"""
import argparse
import json
import os
import resource
import shutil
import statistics
import subprocess
import tempfile
import time

METHODS = ("loglinear", "nlls")


def run(binary, series, method, out):
    shutil.rmtree(out, ignore_errors=True)
    r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run([binary, "fit", series, "--model", "t2", "--method", method, "--out", out],
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
    wall = time.perf_counter() - t0
    r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (r1.ru_utime - r0.ru_utime) + (r1.ru_stime - r0.ru_stime)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("series")
    ap.add_argument("bins", nargs="+")
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--json", default="")
    a = ap.parse_args()
    work = tempfile.mkdtemp(prefix="tauvox-interleave-")
    out = os.path.join(work, "out")
    res = {}
    print("load average before", os.getloadavg())
    for _ in range(a.rounds):
        for b in a.bins:
            for m in METHODS:
                res.setdefault(f"{b} {m}", []).append(run(b, a.series, m, out))
    print("load average after", os.getloadavg())
    for b in a.bins:
        cells = []
        for m in METHODS:
            rs = res[f"{b} {m}"]
            cells.append(f"{m} wall {statistics.median(r[0] for r in rs):.3f} cpu {statistics.median(r[1] for r in rs):.3f} "
                         f"(cpu {' '.join(f'{r[1]:.2f}' for r in rs)})")
        print(b, "|", " | ".join(cells))
    if a.json:
        json.dump(res, open(a.json, "w"), indent=1)
    shutil.rmtree(work)


if __name__ == "__main__":
    main()
