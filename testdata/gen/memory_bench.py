#!/usr/bin/python3
"""Peak memory of tauvox fit on large series (the bounded-memory check).

Writes, volume by volume (never holding the series), float32 NIfTI-1
multi-echo series of mono-exponential decays (invented values: T2 20..300 ms
cycling over the voxels, M0 1000, |signal + Gaussian noise of SD 10|, a
band of air at the edge), runs `tauvox fit` under /usr/bin/time -v and reads
"Maximum resident set size":

  * 256x256x40 x 16 echoes (168 MB), as .nii and as .nii.gz: peak RSS must
    stay under 3x the input size;
  * 512x512x280 x 32 echoes (9.4 GB = 8.75 GiB .nii, generated into --dir and removed
    afterwards): peak RSS must stay under 2 GiB with the default --memory.

  * with --dicom-only: a classic DICOM series of 512x512 x 64 slices x 64
    echoes (4096 files written by pydicom, 2 GiB of 16-bit pixel data, 4
    GiB as float32 samples): peak RSS must stay under 1.5 GiB with the
    default --memory.

Debian bookworm: python3-numpy, python3-pydicom; the time package for
/usr/bin/time.
Usage: /usr/bin/python3 testdata/gen/memory_bench.py [--tauvox bin/tauvox]
       [--dir /tmp] [--skip-large] [--large-method nlls]
"""
import argparse
import json
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import time

import numpy as np


def header(nx, ny, nz, nt):
    """A NIfTI-1 header (nifti1.h layout) for float32 samples at vox_offset 352."""
    h = bytearray(352)
    struct.pack_into("<i", h, 0, 348)
    struct.pack_into("<8h", h, 40, 4, nx, ny, nz, nt, 1, 1, 1)
    struct.pack_into("<hh", h, 70, 16, 32)  # datatype FLOAT32, bitpix
    struct.pack_into("<8f", h, 76, 1, 1, 1, 2, 0, 1, 1, 1)
    struct.pack_into("<f", h, 108, 352)  # vox_offset
    struct.pack_into("<f", h, 112, 1)  # scl_slope
    h[123] = 2 | 16  # mm, ms
    struct.pack_into("<hh", h, 252, 1, 1)  # qform_code, sform_code
    struct.pack_into("<4f", h, 280, 1, 0, 0, 0)
    struct.pack_into("<4f", h, 296, 0, 1, 0, 0)
    struct.pack_into("<4f", h, 312, 0, 0, 2, 0)
    h[344:348] = b"n+1\x00"
    return bytes(h)


def write_series(path, nx, ny, nz, te, gz=False):
    rng = np.random.default_rng(5)
    nv = nx * ny * nz
    t2 = (20 + 280 * (np.arange(nv) % 97) / 96).astype(np.float32)
    i = np.arange(nv) % nx
    air = (i < 8) | (i >= nx - 8)
    opener = open
    if gz:
        import gzip
        opener = lambda p, m: gzip.open(p, m, compresslevel=1)
    with opener(path, "wb") as f:
        f.write(header(nx, ny, nz, len(te)))
        for t in te:
            a = np.where(air, 0, 1000 * np.exp(-t / t2)).astype(np.float32)
            a += (10 * rng.standard_normal(nv)).astype(np.float32)
            np.abs(a, out=a)
            f.write(a.astype("<f4").tobytes())
            del a
    json.dump({"EchoTime": [x / 1000 for x in te]}, open(re.sub(r"\.nii(\.gz)?$", ".json", path), "w"))


def peak_rss(cmd):
    t0 = time.perf_counter()
    r = subprocess.run(["/usr/bin/time", "-v"] + cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if r.returncode != 0:
        sys.exit("failed: %s\n%s" % (" ".join(cmd), r.stderr))
    kb = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", r.stderr).group(1))
    return kb * 1024, wall, r.stdout.strip()


def write_dicom(folder, nx, ny, nz, te, slope=0.05):
    """A classic DICOM multi-echo series (one MR Image Storage file per
    slice and echo, explicit VR little endian, 16-bit samples with
    RescaleSlope) written with pydicom, file by file: the decays of
    write_series stored as round(value / slope)."""
    from pydicom.dataset import FileDataset, FileMetaDataset
    from pydicom.uid import ExplicitVRLittleEndian, generate_uid
    os.makedirs(folder)
    rng = np.random.default_rng(6)
    plane = nx * ny
    t2 = (20 + 280 * (np.arange(plane) % 97) / 96).reshape(ny, nx)
    air = (np.arange(nx) < 8) | (np.arange(nx) >= nx - 8)
    uids = [generate_uid() for _ in range(3)]
    for z in range(nz):
        for t, e in enumerate(te):
            meta = FileMetaDataset()
            meta.MediaStorageSOPClassUID = "1.2.840.10008.5.1.4.1.1.4"
            meta.MediaStorageSOPInstanceUID = generate_uid()
            meta.TransferSyntaxUID = ExplicitVRLittleEndian
            ds = FileDataset(None, {}, file_meta=meta, preamble=b"\0" * 128)
            ds.is_little_endian, ds.is_implicit_VR = True, False
            ds.SOPClassUID, ds.SOPInstanceUID = meta.MediaStorageSOPClassUID, meta.MediaStorageSOPInstanceUID
            ds.Modality, ds.SeriesNumber, ds.SeriesDescription = "MR", 3, "memory bench"
            ds.StudyInstanceUID, ds.SeriesInstanceUID, ds.FrameOfReferenceUID = uids
            ds.ImageType = ["ORIGINAL", "PRIMARY", "M"]
            ds.ScanningSequence, ds.EchoTime, ds.EchoNumbers, ds.RepetitionTime = "SE", f"{e:g}", t + 1, "5000"
            ds.ImageOrientationPatient = ["1", "0", "0", "0", "1", "0"]
            ds.ImagePositionPatient = ["0", "0", f"{2 * z}"]
            ds.PixelSpacing, ds.SliceThickness = ["1", "1"], "2"
            ds.Rows, ds.Columns, ds.SamplesPerPixel, ds.PhotometricInterpretation = ny, nx, 1, "MONOCHROME2"
            ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 16, 16, 15, 0
            ds.RescaleSlope, ds.RescaleIntercept = f"{slope:g}", "0"
            a = np.where(air[None, :], 0, 1000 * np.exp(-e / t2)) + 10 * rng.standard_normal((ny, nx))
            ds.PixelData = np.clip(np.round(np.abs(a) / slope), 0, 65535).astype("<u2").tobytes()
            ds.save_as(os.path.join(folder, f"z{z:03d}e{t:02d}.dcm"), write_like_original=False)


def folder_bytes(p):
    if os.path.isdir(p):
        return sum(os.path.getsize(os.path.join(p, f)) for f in os.listdir(p))
    return os.path.getsize(p)


def run(tauvox, series, out, extra):
    shutil.rmtree(out, ignore_errors=True)
    rss, wall, text = peak_rss([tauvox, "fit", series, "--model", "t2", "--out", out] + extra)
    prov = json.load(open(os.path.join(out, "provenance.json")))
    shutil.rmtree(out)
    return {"rss": rss, "wall_s": wall, "input_bytes": folder_bytes(series), "stdout": text,
            "slabs": prov["settings"]["slabs"], "timings": prov["timings_s"], "status": prov["status_counts"]}


def show(name, r, limit, what):
    print(f"{name}: input {r['input_bytes'] / 2**20:.0f} MiB, peak RSS {r['rss'] / 2**20:.0f} MiB "
          f"({r['rss'] / r['input_bytes']:.2f}x input), limit {limit / 2**20:.0f} MiB ({what}): "
          f"{'OK' if r['rss'] < limit else 'OVER'}; {r['slabs']} slab(s), {r['wall_s']:.1f} s wall; timings {json.dumps(r['timings'])}")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--tauvox", default="bin/tauvox")
    ap.add_argument("--dir", default=tempfile.gettempdir())
    ap.add_argument("--skip-large", action="store_true")
    ap.add_argument("--large-method", default="nlls")
    ap.add_argument("--dicom-only", action="store_true",
                    help="only the DICOM series: 512x512 x 64 slices x 64 echoes, 4096 files, 2 GiB of pixel data")
    ap.add_argument("--dicom-method", default="loglinear")
    a = ap.parse_args()
    tauvox = os.path.abspath(a.tauvox)
    work = tempfile.mkdtemp(prefix="tauvox-mem-", dir=a.dir)
    try:
        if a.dicom_only:
            d = os.path.join(work, "dicom")
            t0 = time.perf_counter()
            write_dicom(d, 512, 512, 64, [5.0 * (k + 1) for k in range(64)])
            print(f"wrote {d}: {len(os.listdir(d))} files, {folder_bytes(d) / 2**30:.2f} GiB in {time.perf_counter() - t0:.0f} s")
            r = run(tauvox, d, os.path.join(work, "out"), ["--method", a.dicom_method, "--quiet"])
            show(f"DICOM 512x512x64x64, t2 {a.dicom_method}", r, int(1.5 * 2**30), "1.5 GiB")
            print(r["stdout"])
            return
        te16 = [10.0 * (k + 1) for k in range(16)]
        for gz in (False, True):
            p = os.path.join(work, "mid.nii.gz" if gz else "mid.nii")
            write_series(p, 256, 256, 40, te16, gz)
            r = run(tauvox, p, os.path.join(work, "out"), ["--method", "nlls", "--quiet"])
            show("256x256x40x16 " + ("nii.gz" if gz else "nii"), r, 3 * r["input_bytes"], "3x input")
            os.remove(p)
        if a.skip_large:
            return
        free = shutil.disk_usage(work).free
        need = 512 * 512 * 280 * 32 * 4 + 3 * 2**30
        if free < need:
            sys.exit(f"{work}: {free / 2**30:.1f} GiB free, need {need / 2**30:.1f}")
        p = os.path.join(work, "large.nii")
        t0 = time.perf_counter()
        write_series(p, 512, 512, 280, [10.0 * (k + 1) for k in range(32)])
        print(f"wrote {p}: {os.path.getsize(p) / 2**30:.2f} GiB in {time.perf_counter() - t0:.0f} s")
        r = run(tauvox, p, os.path.join(work, "out"), ["--method", a.large_method, "--quiet"])
        show(f"512x512x280x32 nii, t2 {a.large_method}", r, 2 * 2**30, "2 GiB")
        print(r["stdout"])
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
