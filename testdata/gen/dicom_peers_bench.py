#!/usr/bin/python3
"""Times tauvox on DICOM and .nii.gz input against the scripts researchers write.

Generates (invented values, fixed seed) one multi-echo spin-echo series of
256x256x24 voxels x 12 echoes (TE 10..120 ms, T2 20..300 ms over a disc, M0
1000, Rician noise sigma 10) twice:

  * as a classic DICOM series written by pydicom: 288 MR Image Storage files
    (one per slice and echo, explicit VR little endian, 16-bit unsigned
    samples with RescaleSlope 0.05, random file names, so that neither tool
    can order them by name);
  * as a .nii.gz (nibabel, gzip level 1) with a BIDS sidecar holding the same
    rescaled samples (1,572,864 voxels x 12 echoes).

Then it runs, interleaved, each --repeat times, every tool as its own
process (interpreter or program start, imports, read, fit, save):

  (a) a pydicom + numpy script: read every file, group by series, sort by
      echo time and slice position along the slice normal, apply the
      rescale, mask, vectorised weighted log-linear fit, save T2 and M0
      with nibabel;
  (b) tauvox fit DIR --model t2 --method nlls (and loglinear once per round);
  (c) the numpy log-linear script and tauvox on the .nii.gz, tauvox with
      --method nlls (the ratio against curve_fit) and --method loglinear
      (the like-for-like ratio against the numpy script, the same
      estimator), and once more with --no-preview (information only: the
      numpy script writes two maps and no previews; the target is judged
      on the default command);
  (d) the limits of this machine: reading every DICOM file with a plain
      loop of open().read() in one Python process, and inflating the
      .nii.gz with `gzip -dc` (one core), beside tauvox's fit-alone time
      from provenance.json (timings_s.fit).

A scipy curve_fit loop on the .nii.gz runs once, on --subset masked voxels,
extrapolated (as peers_bench.py). Medians and every run's time are printed,
with the load average before and after. Agreement: tauvox t2 nlls (.nii.gz)
against curve_fit on the subset; tauvox loglinear on DICOM against the
pydicom script (both read the same stored samples).

Debian bookworm: python3-pydicom 2.3, python3-numpy 1.24, python3-scipy 1.10,
python3-nibabel 5.0.
Usage: /usr/bin/python3 testdata/gen/dicom_peers_bench.py [--tauvox bin/tauvox]
       [--work DIR] [--repeat 3] [--subset 2000] [--json FILE]
"""
import argparse
import json
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np
import nibabel as nib

SHAPE = (256, 256, 24)
TE = [10.0 * (i + 1) for i in range(12)]
SIGMA = 10.0
SLOPE = 0.05

PYDICOM_T2 = r'''
import json, os, sys, time
t0 = time.perf_counter()
import numpy as np, nibabel as nib, pydicom
src, out = sys.argv[1], sys.argv[2]
files = sorted(os.path.join(d, f) for d, _, fs in os.walk(src) for f in fs)
groups = {}
for p in files:
    try:
        ds = pydicom.dcmread(p)
    except pydicom.errors.InvalidDicomError:
        continue
    if "PixelData" in ds:
        groups.setdefault(ds.SeriesInstanceUID, []).append(ds)
series = max(groups.values(), key=len)
iop = np.array(series[0].ImageOrientationPatient, dtype=float)
normal = np.cross(iop[:3], iop[3:])
where = lambda ds: float(np.dot(normal, np.array(ds.ImagePositionPatient, dtype=float)))
tes = sorted({float(ds.EchoTime) for ds in series})
pos = sorted({round(where(ds), 3) for ds in series})
nx, ny = int(series[0].Columns), int(series[0].Rows)
data = np.empty((nx, ny, len(pos), len(tes)), np.float32)
for ds in series:
    z, t = pos.index(round(where(ds), 3)), tes.index(float(ds.EchoTime))
    a = ds.pixel_array.astype(np.float32) * float(getattr(ds, "RescaleSlope", 1)) + float(getattr(ds, "RescaleIntercept", 0))
    data[:, :, z, t] = a.T
te = np.array(tes)
ps = np.array(series[0].PixelSpacing, dtype=float)
p0 = np.array(min(series, key=where).ImagePositionPatient, dtype=float)
step = (pos[-1] - pos[0]) / max(len(pos) - 1, 1)
aff = np.eye(4)
aff[:3, 0], aff[:3, 1], aff[:3, 2], aff[:3, 3] = iop[:3] * ps[1], iop[3:] * ps[0], normal * step, p0
aff = np.diag([-1, -1, 1, 1]) @ aff
tread = time.perf_counter() - t0
peak = data.max(axis=3)
mask = peak > 0.1 * peak.max()
t1 = time.perf_counter()
y = data[mask].astype(np.float64)
ok = y > 0
w = np.where(ok, y * y, 0.0)
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
nib.save(nib.Nifti1Image(t2map, aff), out + '/T2map.nii.gz')
nib.save(nib.Nifti1Image(m0map, aff), out + '/M0map.nii.gz')
print(json.dumps({"fitted": int(mask.sum()), "masked": int(mask.sum()), "fit_s": tfit, "read_s": tread,
                  "files": len(files), "other_s": time.perf_counter() - t0 - tfit}))
'''

PLAIN_READ = r'''
import json, os, sys, time
t0 = time.perf_counter()
n = 0
for d, _, fs in os.walk(sys.argv[1]):
    for f in fs:
        with open(os.path.join(d, f), "rb") as fh:
            n += len(fh.read())
print(json.dumps({"bytes": n, "fit_s": 0.0, "fitted": 0, "masked": 0, "read_s": time.perf_counter() - t0}))
'''

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import peers_bench  # noqa: E402  (the .nii.gz scripts and helpers)


def make_data(work):
    import pydicom
    from pydicom.dataset import Dataset, FileDataset, FileMetaDataset
    from pydicom.uid import ExplicitVRLittleEndian, generate_uid

    rng = np.random.default_rng(20261203)
    nx, ny, nz = SHAPE
    x, y = np.meshgrid(np.arange(nx) - nx / 2 + 0.5, np.arange(ny) - ny / 2 + 0.5, indexing="ij")
    disc = (x * x + y * y) < (0.45 * nx) ** 2
    frac = (np.arange(nx * ny * nz).reshape(nz, ny, nx).transpose(2, 1, 0) % 97) / 96.0
    t2 = 20 + 280 * frac
    obj = np.repeat(disc[:, :, None], nz, axis=2)
    te = np.array(TE)
    sig = np.where(obj[..., None], 1000 * np.exp(-te / t2[..., None]), 0.0)
    mag = np.hypot(sig + SIGMA * rng.standard_normal(sig.shape), SIGMA * rng.standard_normal(sig.shape))
    stored = np.clip(np.round(mag / SLOPE), 0, 65535).astype(np.uint16)  # (x, y, z, t)
    data = stored.astype(np.float32) * np.float32(SLOPE)

    dcm = os.path.join(work, "dicom")
    os.makedirs(dcm, exist_ok=True)
    series_uid, study_uid, frame_uid = generate_uid(), generate_uid(), generate_uid()
    names = rng.permutation(nz * len(TE))
    k = 0
    for z in range(nz):
        for t, e in enumerate(TE):
            meta = FileMetaDataset()
            meta.MediaStorageSOPClassUID = "1.2.840.10008.5.1.4.1.1.4"
            meta.MediaStorageSOPInstanceUID = generate_uid()
            meta.TransferSyntaxUID = ExplicitVRLittleEndian
            ds = FileDataset(None, {}, file_meta=meta, preamble=b"\0" * 128)
            ds.is_little_endian, ds.is_implicit_VR = True, False
            ds.SOPClassUID, ds.SOPInstanceUID = meta.MediaStorageSOPClassUID, meta.MediaStorageSOPInstanceUID
            ds.Modality = "MR"
            ds.StudyInstanceUID, ds.SeriesInstanceUID, ds.FrameOfReferenceUID = study_uid, series_uid, frame_uid
            ds.SeriesNumber, ds.InstanceNumber = 7, k + 1
            ds.SeriesDescription = "bench multi-echo SE"
            ds.ImageType = ["ORIGINAL", "PRIMARY", "M", "ND"]
            ds.ScanningSequence, ds.SequenceVariant = "SE", "NONE"
            ds.EchoTime, ds.EchoNumbers, ds.RepetitionTime = f"{e:g}", t + 1, "4000"
            ds.MagneticFieldStrength = "3"
            ds.PatientName, ds.PatientID = "BENCH^INVENTED", "BENCH0001"
            ds.ImageOrientationPatient = ["1", "0", "0", "0", "1", "0"]
            ds.ImagePositionPatient = ["-128", "-128", f"{-36 + 3 * z:g}"]
            ds.PixelSpacing, ds.SliceThickness = ["1", "1"], "3"
            ds.Rows, ds.Columns = ny, nx
            ds.SamplesPerPixel, ds.PhotometricInterpretation = 1, "MONOCHROME2"
            ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 16, 16, 15, 0
            ds.RescaleSlope, ds.RescaleIntercept = f"{SLOPE:g}", "0"
            ds.PixelData = np.ascontiguousarray(stored[:, :, z, t].T).tobytes()  # rows of columns
            ds.save_as(os.path.join(dcm, f"IM{names[k]:05d}"), write_like_original=False)
            k += 1

    aff = np.diag([-1.0, -1.0, 3.0, 1.0])
    aff[:3, 3] = [128, 128, -36]
    p = os.path.join(work, "t2.nii.gz")
    nib.save(nib.Nifti1Image(data, aff), p)
    json.dump({"EchoTime": [t / 1000 for t in TE], "RepetitionTime": 4.0}, open(p.replace(".nii.gz", ".json"), "w"))
    return dcm, p


def run_plain_gunzip(path):
    t0 = time.perf_counter()
    with open(os.devnull, "wb") as null:
        subprocess.run(["gzip", "-dc", path], stdout=null, check=True)
    return {"wall_s": time.perf_counter() - t0}


def run_tauvox(tauvox, work, name, series, args):
    r = peers_bench.run_tauvox(tauvox, work, name, series, args)
    r["voxels"] = int(np.prod(SHAPE))
    return r


def with_cpu(f):
    """Runs f (one child process) and adds the child's CPU time (user +
    system, from getrusage) to its result: on a shared machine the CPU
    time does not depend on the other sessions the way wall time does."""
    def g():
        import resource
        r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        out = f()
        r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
        out["cpu_s"] = (r1.ru_utime - r0.ru_utime) + (r1.ru_stime - r0.ru_stime)
        return out
    return g


def loadavg():
    try:
        return [float(x) for x in open("/proc/loadavg").read().split()[:3]]
    except OSError:
        return []


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--tauvox", default="bin/tauvox")
    ap.add_argument("--work", default="")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--subset", type=int, default=2000)
    ap.add_argument("--json", default="")
    ap.add_argument("--no-curve-fit", action="store_true")
    a = ap.parse_args()
    tauvox = os.path.abspath(a.tauvox)
    work = a.work or tempfile.mkdtemp(prefix="tauvox-dicom-peers-")
    os.makedirs(work, exist_ok=True)
    import pydicom
    import scipy
    if not os.path.isdir(os.path.join(work, "dicom")):
        dcm, nii = make_data(work)
    else:
        dcm, nii = os.path.join(work, "dicom"), os.path.join(work, "t2.nii.gz")
    res = {"machine": {"cpus": os.cpu_count(), "platform": platform.platform(), "python": platform.python_version(),
                       "numpy": np.__version__, "nibabel": nib.__version__, "pydicom": pydicom.__version__,
                       "scipy": scipy.__version__, "load_before": loadavg()},
           "data": {"shape": list(SHAPE), "echoes": len(TE), "dicom_files": len(os.listdir(dcm)),
                    "dicom_bytes": sum(os.path.getsize(os.path.join(dcm, f)) for f in os.listdir(dcm)),
                    "nii_gz_bytes": os.path.getsize(nii)}}
    quick = [
        ("pydicom_numpy", lambda: peers_bench.run_peer(work, "pydicom_t2", PYDICOM_T2, [dcm])),
        ("tauvox_dicom_nlls", lambda: run_tauvox(tauvox, work, "tauvox_dicom", dcm, ["--model", "t2", "--method", "nlls"])),
        ("numpy_niigz", lambda: peers_bench.run_peer(work, "numpy_t2", peers_bench.LOGLINEAR_T2, [nii])),
        ("tauvox_niigz_nlls", lambda: run_tauvox(tauvox, work, "tauvox_nii", nii, ["--model", "t2", "--method", "nlls"])),
        ("tauvox_niigz_loglinear", lambda: run_tauvox(tauvox, work, "tauvox_nii_ll", nii, ["--model", "t2", "--method", "loglinear"])),
        ("tauvox_dicom_loglinear", lambda: run_tauvox(tauvox, work, "tauvox_dicom_ll", dcm, ["--model", "t2", "--method", "loglinear"])),
        # Information only: the numpy script draws no previews.
        ("tauvox_niigz_loglinear_nopreview", lambda: run_tauvox(tauvox, work, "tauvox_nii_ll_np", nii, ["--model", "t2", "--method", "loglinear", "--no-preview"])),
        ("plain_read_dicom", lambda: peers_bench.run_peer(work, "plain_read", PLAIN_READ, [dcm])),
        ("plain_gunzip", lambda: run_plain_gunzip(nii)),
    ]
    quick = [(k, with_cpu(f)) for k, f in quick]
    runs = {k: [] for k, _ in quick}
    for _ in range(max(a.repeat, 1)):
        for k, f in quick:
            runs[k].append(f())
    for k, rs in runs.items():
        walls = [r["wall_s"] for r in rs]
        med = dict(sorted(rs, key=lambda r: r["wall_s"])[len(rs) // 2])
        med["all_wall_s"] = walls
        med["all_cpu_s"] = [r["cpu_s"] for r in rs]
        med["median_cpu_s"] = statistics.median(med["all_cpu_s"])
        med["median_wall_s"] = statistics.median(walls)
        res[k] = med
    if not a.no_curve_fit:
        res["curve_fit"] = peers_bench.run_peer(work, "curvefit_t2", peers_bench.CURVE_FIT_T2, [nii, str(a.subset)])
        res["agree_nlls_vs_curve_fit"] = peers_bench.agreement(res["tauvox_niigz_nlls"]["out"], "T2map.nii.gz", res["curve_fit"]["out"])
    res["agree_dicom_loglinear_vs_pydicom"] = peers_bench.agreement(res["tauvox_dicom_loglinear"]["out"], "T2map.nii.gz", res["pydicom_numpy"]["out"])
    res["agree_dicom_vs_nii_nlls"] = peers_bench.agreement(res["tauvox_dicom_nlls"]["out"], "T2map.nii.gz", res["tauvox_niigz_nlls"]["out"])
    res["machine"]["load_after"] = loadavg()

    m = lambda k: res[k]["median_wall_s"]
    spread = lambda k: f"{min(res[k]['all_wall_s']):.2f}–{max(res[k]['all_wall_s']):.2f}"
    print(f"data: {SHAPE[0]}x{SHAPE[1]}x{SHAPE[2]} x {len(TE)} echoes; DICOM {res['data']['dicom_files']} files "
          f"({res['data']['dicom_bytes'] / 1e6:.1f} MB), .nii.gz {res['data']['nii_gz_bytes'] / 1e6:.1f} MB; "
          f"{os.cpu_count()} CPUs; load average before {res['machine']['load_before']}, after {res['machine']['load_after']}")
    row = "{:<46} {:>10} {:>13} {:>12} {:>9} {:>9}"
    print(row.format("command", "median (s)", "spread (s)", "ratio", "CPU (s)", "CPU ratio"))
    c = lambda k: res[k]["median_cpu_s"]
    tv, tn = m("tauvox_dicom_nlls"), m("tauvox_niigz_nlls")
    print(row.format("pydicom + numpy log-linear, DICOM", f"{m('pydicom_numpy'):.2f}", spread("pydicom_numpy"), f"{m('pydicom_numpy') / tv:.2f}x", f"{c('pydicom_numpy'):.2f}", f"{c('pydicom_numpy') / c('tauvox_dicom_nlls'):.2f}x"))
    print(row.format("tauvox fit --model t2 --method nlls, DICOM", f"{tv:.2f}", spread("tauvox_dicom_nlls"), "1", f"{c('tauvox_dicom_nlls'):.2f}", "1"))
    print(row.format("tauvox fit --method loglinear, DICOM", f"{m('tauvox_dicom_loglinear'):.2f}", spread("tauvox_dicom_loglinear"), "", f"{c('tauvox_dicom_loglinear'):.2f}", ""))
    print(row.format("numpy log-linear, .nii.gz", f"{m('numpy_niigz'):.2f}", spread("numpy_niigz"), f"{m('numpy_niigz') / tn:.2f}x", f"{c('numpy_niigz'):.2f}", f"{c('numpy_niigz') / c('tauvox_niigz_nlls'):.2f}x"))
    print(row.format("tauvox fit --model t2 --method nlls, .nii.gz", f"{tn:.2f}", spread("tauvox_niigz_nlls"), "1", f"{c('tauvox_niigz_nlls'):.2f}", "1"))
    # Like for like: the same estimator (weighted log-linear) as the numpy script.
    tl = m("tauvox_niigz_loglinear")
    print(row.format("tauvox fit --method loglinear, .nii.gz", f"{tl:.2f}", spread("tauvox_niigz_loglinear"), "", f"{c('tauvox_niigz_loglinear'):.2f}", ""))
    print(row.format("  numpy log-linear / tauvox loglinear (like for like)", "", "", f"{m('numpy_niigz') / tl:.2f}x", "", f"{c('numpy_niigz') / c('tauvox_niigz_loglinear'):.2f}x"))
    tp = m("tauvox_niigz_loglinear_nopreview")
    print(row.format("tauvox loglinear --no-preview, .nii.gz (info)", f"{tp:.2f}", spread("tauvox_niigz_loglinear_nopreview"), f"{m('numpy_niigz') / tp:.2f}x", f"{c('tauvox_niigz_loglinear_nopreview'):.2f}", ""))
    if "curve_fit" in res:
        cf = res["curve_fit"]
        print(row.format("curve_fit loop, .nii.gz (extrapolated, 1 run)", f"{cf['extrapolated_wall_s']:.1f}", "", f"{cf['extrapolated_wall_s'] / tn:.0f}x", "", ""))
        print(row.format("  curve_fit / tauvox nlls (targets: >= 150x)", "", "", f"{cf['extrapolated_wall_s'] / tn:.0f}x", "", ""))
    print(row.format("limit: read every DICOM file (Python open/read)", f"{m('plain_read_dicom'):.2f}", spread("plain_read_dicom"), "", f"{c('plain_read_dicom'):.2f}", ""))
    print(row.format("limit: gzip -dc the .nii.gz (one core)", f"{m('plain_gunzip'):.2f}", spread("plain_gunzip"), "", f"{c('plain_gunzip'):.2f}", ""))
    pr = res["pydicom_numpy"]
    print(f"pydicom script (median run): read+sort {pr['read_s']:.2f} s, fit {pr['fit_s']:.2f} s, rest {pr['other_s'] - pr['read_s']:.2f} s")
    for k in ("tauvox_dicom_nlls", "tauvox_niigz_nlls", "tauvox_niigz_loglinear"):
        print(f"{k} timings (median run): " + json.dumps(res[k]["timings"]))
    print("every run, wall (s): " + "; ".join(f"{k} " + " ".join(f"{w:.2f}" for w in res[k]["all_wall_s"]) for k in runs))
    print("every run, CPU (s): " + "; ".join(f"{k} " + " ".join(f"{w:.2f}" for w in res[k]["all_cpu_s"]) for k in runs))
    for k in ("agree_nlls_vs_curve_fit", "agree_dicom_loglinear_vs_pydicom", "agree_dicom_vs_nii_nlls"):
        if k in res:
            g = res[k]
            print(f"{k}: {g['voxels']} voxels, median rel. diff {g['median_rel']:.2e}, max {g['max_rel']:.2e}, above 1e-3: {100 * g['frac_above_1e-3']:.2f} %")
    if a.json:
        json.dump(res, open(a.json, "w"), indent=2)
    if not a.work:
        shutil.rmtree(work)


if __name__ == "__main__":
    main()
