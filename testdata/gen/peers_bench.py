#!/usr/bin/python3
"""Times tauvox against the scripts researchers write, in one run.

Generates (invented values, fixed seed) a 128x128x24 multi-echo spin-echo
series (16 echoes, TE 10..160 ms, T2 20..300 ms over a disc, M0 1000, Rician
noise sigma 10: SNR 100) and an inversion-recovery series (8 TIs 50..6000 ms,
TR 10 s, T1 200..2500 ms), NIfTI .nii.gz with BIDS sidecars, then runs each
peer as its own process (interpreter start, imports, load, fit, save: the
whole command) and tauvox on the same files:

  (a) a scipy.optimize.curve_fit loop over voxels (nibabel load, loop,
      curve_fit, nibabel save), on a subset of the masked voxels and
      extrapolated to all of them (the script says so in its output);
  (b) a vectorised numpy weighted log-linear fit of every masked voxel;
  (c) tauvox fit --model t2 --method nlls and --model t1-ir (files to maps);
  (d) an inversion-recovery curve_fit loop on |a + b*exp(-TI/T1)| with
      three starts (polarity restored by fitting the magnitude model), on a
      subset, extrapolated.

It prints whole-command times, fit-only throughput (tauvox's own fit time
is timings_s.fit of provenance.json), ratios, and the agreement of the
tauvox maps with curve_fit on the voxels both fitted.

OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE are removed from the environment of
every peer process (the machine's environment notes say they slow numpy).

Debian bookworm: python3-numpy 1.24, python3-scipy 1.10, python3-nibabel 5.0.
Usage: /usr/bin/python3 testdata/gen/peers_bench.py [--tauvox bin/tauvox]
       [--work DIR] [--subset 3000] [--ir-subset 1000] [--json FILE]
"""
import argparse
import json
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np
import nibabel as nib

TE = [10.0 * (i + 1) for i in range(16)]
TI = [50.0, 100.0, 200.0, 400.0, 800.0, 1600.0, 3200.0, 6000.0]
TR_IR = 10000.0
SHAPE = (128, 128, 24)
SIGMA = 10.0

# Shared by the peer scripts: the mask a researcher would write (largest
# sample above a tenth of the series' largest sample).
MASK_SNIPPET = """
peak = data.max(axis=3)
mask = peak > 0.1 * peak.max()
"""

CURVE_FIT_T2 = r'''
import json, sys, time
t0 = time.perf_counter()
import numpy as np, nibabel as nib
from scipy.optimize import curve_fit
src, out, subset = sys.argv[1], sys.argv[2], int(sys.argv[3])
te = np.array(json.load(open(src.split('.nii')[0] + '.json'))['EchoTime']) * 1000
img = nib.load(src)
data = img.get_fdata(dtype=np.float32)
''' + MASK_SNIPPET + r'''
idx = np.argwhere(mask)
sel = idx[:subset]
def f(t, m0, t2):
    return m0 * np.exp(-t / t2)
t2map = np.full(mask.shape, np.nan, np.float32)
m0map = np.full(mask.shape, np.nan, np.float32)
t1 = time.perf_counter()
for i, j, k in sel:
    y = data[i, j, k, :]
    try:
        p, _ = curve_fit(f, te, y, p0=[y[0] * 1.2, 50.0], maxfev=2000)
    except RuntimeError:
        continue
    t2map[i, j, k], m0map[i, j, k] = p[1], p[0]
tfit = time.perf_counter() - t1
t2 = time.perf_counter()
nib.save(nib.Nifti1Image(t2map, img.affine), out + '/T2map.nii.gz')
nib.save(nib.Nifti1Image(m0map, img.affine), out + '/M0map.nii.gz')
tsave = time.perf_counter() - t2
print(json.dumps({"fitted": len(sel), "masked": int(mask.sum()), "fit_s": tfit,
                  "other_s": time.perf_counter() - t0 - tfit, "save_s": tsave}))
'''

LOGLINEAR_T2 = r'''
import json, sys, time
t0 = time.perf_counter()
import numpy as np, nibabel as nib
src, out = sys.argv[1], sys.argv[2]
te = np.array(json.load(open(src.split('.nii')[0] + '.json'))['EchoTime']) * 1000
img = nib.load(src)
data = img.get_fdata(dtype=np.float32)
''' + MASK_SNIPPET + r'''
t1 = time.perf_counter()
y = data[mask].astype(np.float64)           # (voxels, echoes)
ok = y > 0
w = np.where(ok, y * y, 0.0)                # weights y^2 (var of ln y ~ sigma^2/y^2)
l = np.log(np.where(ok, y, 1.0))
sw = w.sum(1); sx = w @ te; sxx = w @ (te * te)
sy = (w * l).sum(1); sxy = (w * l) @ te
den = sw * sxx - sx * sx
slope = (sw * sxy - sx * sy) / den
icpt = (sy - slope * sx) / sw
with np.errstate(divide='ignore', invalid='ignore'):
    t2 = -1.0 / slope
t2map = np.full(mask.shape, np.nan, np.float32); t2map[mask] = t2
m0map = np.full(mask.shape, np.nan, np.float32); m0map[mask] = np.exp(icpt)
tfit = time.perf_counter() - t1
nib.save(nib.Nifti1Image(t2map, img.affine), out + '/T2map.nii.gz')
nib.save(nib.Nifti1Image(m0map, img.affine), out + '/M0map.nii.gz')
print(json.dumps({"fitted": int(mask.sum()), "masked": int(mask.sum()), "fit_s": tfit,
                  "other_s": time.perf_counter() - t0 - tfit}))
'''

CURVE_FIT_IR = r'''
import json, sys, time
t0 = time.perf_counter()
import numpy as np, nibabel as nib
from scipy.optimize import curve_fit
src, out, subset = sys.argv[1], sys.argv[2], int(sys.argv[3])
ti = np.array(json.load(open(src.split('.nii')[0] + '.json'))['InversionTime']) * 1000
img = nib.load(src)
data = img.get_fdata(dtype=np.float32)
''' + MASK_SNIPPET + r'''
idx = np.argwhere(mask)
sel = idx[:subset]
def f(t, a, b, t1):
    return np.abs(a + b * np.exp(-t / t1))
t1map = np.full(mask.shape, np.nan, np.float32)
t1 = time.perf_counter()
for i, j, k in sel:
    y = data[i, j, k, :].astype(np.float64)
    best = None
    for start in (300.0, 1000.0, 2500.0):   # several starts: polarity restoration by the magnitude model
        try:
            p, _ = curve_fit(f, ti, y, p0=[y.max(), -2 * y.max(), start], maxfev=4000)
        except RuntimeError:
            continue
        cost = float(np.sum((f(ti, *p) - y) ** 2))
        if best is None or cost < best[0]:
            best = (cost, p)
    if best is not None:
        t1map[i, j, k] = best[1][2]
tfit = time.perf_counter() - t1
nib.save(nib.Nifti1Image(t1map, img.affine), out + '/T1map.nii.gz')
print(json.dumps({"fitted": len(sel), "masked": int(mask.sum()), "fit_s": tfit,
                  "other_s": time.perf_counter() - t0 - tfit}))
'''


def clean_env():
    env = dict(os.environ)
    for k in ("OPENBLAS_CORETYPE", "OPENBLAS_L2_SIZE"):
        env.pop(k, None)
    return env


def make_series(work):
    rng = np.random.default_rng(20261201)
    nx, ny, nz = SHAPE
    x, y = np.meshgrid(np.arange(nx) - nx / 2 + 0.5, np.arange(ny) - ny / 2 + 0.5, indexing="ij")
    disc = (x * x + y * y) < (0.45 * nx) ** 2
    frac = (np.arange(nx * ny * nz).reshape(nz, ny, nx).transpose(2, 1, 0) % 97) / 96.0
    obj = np.repeat(disc[:, :, None], nz, axis=2)
    aff = np.diag([1.0, 1.0, 3.0, 1.0])
    aff[:3, 3] = [-64, -64, -36]

    def rician(a):
        return np.hypot(a + SIGMA * rng.standard_normal(a.shape), SIGMA * rng.standard_normal(a.shape)).astype(np.float32)

    t2 = 20 + 280 * frac
    te = np.array(TE)
    sig = np.where(obj[..., None], 1000 * np.exp(-te / t2[..., None]), 0.0)
    p = os.path.join(work, "t2.nii.gz")
    nib.save(nib.Nifti1Image(rician(sig), aff), p)
    json.dump({"EchoTime": [t / 1000 for t in TE], "RepetitionTime": 4.0}, open(p.replace(".nii.gz", ".json"), "w"))

    t1 = 200 + 2300 * frac
    ti = np.array(TI)
    e = np.exp(-ti / t1[..., None])
    sig = np.where(obj[..., None], 1000 * np.abs(1 - 2 * e + np.exp(-TR_IR / t1[..., None])), 0.0)
    q = os.path.join(work, "ir.nii.gz")
    nib.save(nib.Nifti1Image(rician(sig), aff), q)
    json.dump({"InversionTime": [t / 1000 for t in TI], "RepetitionTime": TR_IR / 1000}, open(q.replace(".nii.gz", ".json"), "w"))
    return p, q


def run_peer(work, name, code, args):
    script = os.path.join(work, name + ".py")
    open(script, "w").write(code)
    out = os.path.join(work, name)
    os.makedirs(out, exist_ok=True)
    t0 = time.perf_counter()
    r = subprocess.run([sys.executable, script] + args[:1] + [out] + args[1:], env=clean_env(),
                       capture_output=True, text=True, check=True)
    wall = time.perf_counter() - t0
    info = json.loads(r.stdout.strip().splitlines()[-1])
    info["wall_s"] = wall
    # Extrapolate a subset loop to every masked voxel: the measured per-voxel
    # fit time times the masked count, plus the rest of the run.
    info["extrapolated_wall_s"] = wall - info["fit_s"] + info["fit_s"] * info["masked"] / max(info["fitted"], 1)
    info["out"] = out
    return info


def run_tauvox(tauvox, work, name, series, args):
    out = os.path.join(work, name)
    shutil.rmtree(out, ignore_errors=True)
    t0 = time.perf_counter()
    subprocess.run([tauvox, "fit", series, "--out", out, "--quiet"] + args, env=clean_env(), check=True)
    wall = time.perf_counter() - t0
    prov = json.load(open(os.path.join(out, "provenance.json")))
    voxels = int(np.prod(SHAPE))
    fitted = prov["status_counts"].get("ok", 0) + prov["status_counts"].get("not-converged", 0) + prov["status_counts"].get("out-of-bounds", 0)
    return {"wall_s": wall, "fit_s": prov["timings_s"]["fit"], "timings": prov["timings_s"], "voxels": voxels,
            "fitted": fitted, "out": out, "status": prov["status_counts"]}


def agreement(tauvox_dir, name, peer_dir, peer_name=None):
    a = nib.load(os.path.join(tauvox_dir, name)).get_fdata(dtype=np.float64)
    st = nib.load(os.path.join(tauvox_dir, "status.nii.gz")).get_fdata()
    b = nib.load(os.path.join(peer_dir, peer_name or name)).get_fdata(dtype=np.float64)
    both = (st == 0) & np.isfinite(a) & np.isfinite(b) & (b > 0)
    rel = np.abs(a[both] - b[both]) / np.abs(b[both])
    return {"voxels": int(both.sum()), "median_rel": float(np.median(rel)), "max_rel": float(rel.max()),
            "frac_above_1e-3": float(np.mean(rel > 1e-3))}


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--tauvox", default="bin/tauvox")
    ap.add_argument("--work", default="")
    ap.add_argument("--subset", type=int, default=3000)
    ap.add_argument("--ir-subset", type=int, default=1000)
    ap.add_argument("--json", default="")
    ap.add_argument("--repeat", type=int, default=5,
                    help="runs of each quick command (numpy, tauvox), interleaved; the median is reported")
    a = ap.parse_args()
    tauvox = os.path.abspath(a.tauvox)
    work = a.work or tempfile.mkdtemp(prefix="tauvox-peers-")
    os.makedirs(work, exist_ok=True)
    t2s, irs = make_series(work)
    res = {"machine": {"cpus": os.cpu_count(), "platform": platform.platform(), "python": platform.python_version(),
                       "numpy": np.__version__, "nibabel": nib.__version__},
           "data": {"shape": list(SHAPE), "echoes": len(TE), "tis": len(TI), "sigma": SIGMA,
                    "t2_bytes": os.path.getsize(t2s), "ir_bytes": os.path.getsize(irs)}}
    import scipy
    res["machine"]["scipy"] = scipy.__version__
    res["curve_fit_t2"] = run_peer(work, "curvefit_t2", CURVE_FIT_T2, [t2s, str(a.subset)])
    # The same T2 series uncompressed: gzip inflate is a large part of the
    # whole-command time of every tool.
    t2p = t2s[:-3]
    nib.save(nib.load(t2s), t2p)
    # The quick commands run --repeat times each, interleaved (a change of
    # the machine's load during the run then touches every command alike);
    # each is reported by its median whole-command time.
    quick = [
        ("numpy_loglinear_t2", lambda: run_peer(work, "numpy_t2", LOGLINEAR_T2, [t2s])),
        ("tauvox_t2_nlls", lambda: run_tauvox(tauvox, work, "tauvox_t2", t2s, ["--model", "t2", "--method", "nlls"])),
        ("tauvox_t2_loglinear", lambda: run_tauvox(tauvox, work, "tauvox_t2ll", t2s, ["--model", "t2", "--method", "loglinear"])),
        ("numpy_loglinear_t2_nii", lambda: run_peer(work, "numpy_t2_nii", LOGLINEAR_T2, [t2p])),
        ("tauvox_t2_nlls_nii", lambda: run_tauvox(tauvox, work, "tauvox_t2_nii", t2p, ["--model", "t2", "--method", "nlls"])),
        ("tauvox_t1ir", lambda: run_tauvox(tauvox, work, "tauvox_ir", irs, ["--model", "t1-ir"])),
        ("tauvox_t1ir_nlls", lambda: run_tauvox(tauvox, work, "tauvox_irnlls", irs, ["--model", "t1-ir", "--method", "nlls"])),
    ]
    runs = {k: [] for k, _ in quick}
    for _ in range(max(a.repeat, 1)):
        for k, f in quick:
            runs[k].append(f())
    for k, rs in runs.items():
        rs.sort(key=lambda r: r["wall_s"])
        med = dict(rs[len(rs) // 2])
        med["all_wall_s"] = [r["wall_s"] for r in rs]
        res[k] = med
    res["curve_fit_ir"] = run_peer(work, "curvefit_ir", CURVE_FIT_IR, [irs, str(a.ir_subset)])

    res["agree_t2_nlls_vs_curve_fit"] = agreement(res["tauvox_t2_nlls"]["out"], "T2map.nii.gz", res["curve_fit_t2"]["out"])
    res["agree_t2_loglinear_vs_numpy"] = agreement(res["tauvox_t2_loglinear"]["out"], "T2map.nii.gz", res["numpy_loglinear_t2"]["out"])
    res["agree_t1ir_vs_curve_fit"] = agreement(res["tauvox_t1ir"]["out"], "T1map.nii.gz", res["curve_fit_ir"]["out"])
    res["agree_t1ir_nlls_vs_curve_fit"] = agreement(res["tauvox_t1ir_nlls"]["out"], "T1map.nii.gz", res["curve_fit_ir"]["out"])

    cf, npl, tv, tvl = res["curve_fit_t2"], res["numpy_loglinear_t2"], res["tauvox_t2_nlls"], res["tauvox_t2_loglinear"]
    ci, ti_, tin = res["curve_fit_ir"], res["tauvox_t1ir"], res["tauvox_t1ir_nlls"]
    print(f"data: {SHAPE[0]}x{SHAPE[1]}x{SHAPE[2]} voxels; T2 series {len(TE)} echoes ({res['data']['t2_bytes']/1e6:.1f} MB .nii.gz), "
          f"IR series {len(TI)} TIs ({res['data']['ir_bytes']/1e6:.1f} MB); masked voxels {cf['masked']}; machine {os.cpu_count()} CPUs")
    print(f"curve_fit loop on {cf['fitted']} of {cf['masked']} masked voxels, extrapolated to all; IR loop on {ci['fitted']}.")
    print()
    row = "{:<44} {:>12} {:>14} {:>14}"
    print(row.format("command", "whole (s)", "fit voxels/s", "whole ratio"))
    def rate(n, s):
        return f"{n / s:,.0f}" if s > 0 else "-"
    print(row.format("curve_fit loop, T2 (extrapolated)", f"{cf['extrapolated_wall_s']:.1f}", rate(cf["fitted"], cf["fit_s"]), f"{cf['extrapolated_wall_s'] / tv['wall_s']:.0f}x"))
    print(row.format("numpy log-linear, T2", f"{npl['wall_s']:.2f}", rate(npl["fitted"], npl["fit_s"]), f"{npl['wall_s'] / tv['wall_s']:.2f}x"))
    print(row.format("tauvox fit --model t2 --method nlls", f"{tv['wall_s']:.2f}", rate(tv["fitted"], tv["fit_s"]), "1"))
    print(row.format("tauvox fit --model t2 --method loglinear", f"{tvl['wall_s']:.2f}", rate(tvl["fitted"], tvl["fit_s"]), f"{tvl['wall_s'] / tv['wall_s']:.2f}x"))
    npn, tvn = res["numpy_loglinear_t2_nii"], res["tauvox_t2_nlls_nii"]
    print(row.format("numpy log-linear, T2, .nii input", f"{npn['wall_s']:.2f}", rate(npn["fitted"], npn["fit_s"]), f"{npn['wall_s'] / tvn['wall_s']:.2f}x"))
    print(row.format("tauvox t2 nlls, .nii input", f"{tvn['wall_s']:.2f}", rate(tvn["fitted"], tvn["fit_s"]), "1"))
    print(row.format("curve_fit loop, IR |a+b e|, 3 starts (extrap.)", f"{ci['extrapolated_wall_s']:.1f}", rate(ci["fitted"], ci["fit_s"]), f"{ci['extrapolated_wall_s'] / ti_['wall_s']:.0f}x"))
    print(row.format("tauvox fit --model t1-ir (rdnls)", f"{ti_['wall_s']:.2f}", rate(ti_["fitted"], ti_["fit_s"]), "1"))
    print(row.format("tauvox fit --model t1-ir --method nlls", f"{tin['wall_s']:.2f}", rate(tin["fitted"], tin["fit_s"]), f"{tin['wall_s'] / ti_['wall_s']:.2f}x"))
    print()
    print("tauvox fit timings (s):", json.dumps(tv["timings"]), "|", json.dumps(ti_["timings"]))
    print(f"targets: t2 nlls vs curve_fit {cf['extrapolated_wall_s'] / tv['wall_s']:.0f}x (>= 150), vs numpy log-linear "
          f"{npl['wall_s'] / tv['wall_s']:.2f}x (>= 2); t1-ir vs curve_fit {ci['extrapolated_wall_s'] / ti_['wall_s']:.0f}x (>= 100)")
    print(f"  with .nii input: t2 nlls vs curve_fit {cf['extrapolated_wall_s'] / tvn['wall_s']:.0f}x "
          f"(the curve_fit loop as measured on .nii.gz: its load is under 1 % of its time), vs numpy log-linear {npn['wall_s'] / tvn['wall_s']:.2f}x")
    print("fit-only ratios: t2 nlls vs curve_fit {:.0f}x, vs numpy {:.1f}x; t1-ir vs curve_fit {:.0f}x".format(
        (tv["fitted"] / tv["fit_s"]) / (cf["fitted"] / cf["fit_s"]), (tv["fitted"] / tv["fit_s"]) / (npl["fitted"] / npl["fit_s"]),
        (ti_["fitted"] / ti_["fit_s"]) / (ci["fitted"] / ci["fit_s"])))
    print("whole-command times of every run (s): " + "; ".join(
        f"{k} " + " ".join(f"{w:.2f}" for w in res[k]["all_wall_s"]) for k in runs))
    print()
    for k in ("agree_t2_nlls_vs_curve_fit", "agree_t2_loglinear_vs_numpy", "agree_t1ir_vs_curve_fit", "agree_t1ir_nlls_vs_curve_fit"):
        g = res[k]
        print(f"{k}: {g['voxels']} voxels, median rel. diff {g['median_rel']:.2e}, max {g['max_rel']:.2e}, above 1e-3: {100 * g['frac_above_1e-3']:.2f} %")
    if a.json:
        json.dump(res, open(a.json, "w"), indent=2)
    if not a.work:
        shutil.rmtree(work)


if __name__ == "__main__":
    main()
