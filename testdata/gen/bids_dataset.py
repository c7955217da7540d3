#!/usr/bin/python3
"""Write the small BIDS dataset of testdata/bids/ that the tests of
`tauvox batch` and io/bids read (input only; no reference values).

Run from the repository root:
    /usr/bin/python3 testdata/gen/bids_dataset.py
Tested with Debian python3-numpy 1.24.2 and python3-nibabel 5.0.0.

Layout (BIDS qMRI file collections, check-values §3.6: one 3-D file per
echo or inversion, linked by echo-/inv-, the values in the sidecars, times in
seconds):

  sub-01/ses-1/anat/  MESE, 6 echoes TE 10..60 ms, TR 3 s (one sidecar per echo)
                      IRT1, 4 inversions TI 100..2400 ms, TR 10 s, part-mag,
                      plus a part-phase file of inv-1 that must be left out
  sub-02/ses-1/anat/  MESE, 6 echoes; EchoTime per echo sidecar, the rest
                      inherited from sub-02/ses-1/sub-02_ses-1_MESE.json

Each image is 16 x 16 x 2 float32 voxels of 1.5 x 1.5 x 4 mm: a disc of
radius 6 voxels whose T2 (MESE) rises from 40 to 120 ms and whose T1 (IRT1)
from 300 to 1500 ms with the column index, M0 1000, Gaussian noise SD 2,
in air of noise only (magnitude). The values are invented.
"""
import json
import os

import nibabel as nib
import numpy as np

ROOT = os.path.join("testdata", "bids")
NX, NY, NZ = 16, 16, 2
AFFINE = np.array([[-1.5, 0, 0, 12.0], [0, 1.5, 0, -11.0], [0, 0, 4, -2.0], [0, 0, 0, 1]])
rng = np.random.default_rng(20260915)

i, j = np.meshgrid(np.arange(NX), np.arange(NY), indexing="ij")
disc = (i - 7.5) ** 2 + (j - 7.5) ** 2 <= 36
frac = i / (NX - 1.0)
T2 = np.repeat((40 + 80 * frac)[:, :, None], NZ, axis=2)
T1 = np.repeat((300 + 1200 * frac)[:, :, None], NZ, axis=2)
inside = np.repeat(disc[:, :, None], NZ, axis=2)


def magnitude(clean):
    re = clean + rng.normal(0, 2, clean.shape)
    im = rng.normal(0, 2, clean.shape)
    return np.sqrt(re ** 2 + im ** 2).astype(np.float32)


def save(path, data, meta=None):
    os.makedirs(os.path.dirname(path), exist_ok=True)
    img = nib.Nifti1Image(data, AFFINE)
    img.header.set_xyzt_units("mm", "sec")
    img.set_qform(AFFINE, 1)
    img.set_sform(AFFINE, 1)
    nib.save(img, path)
    if meta is not None:
        with open(path.replace(".nii.gz", ".json"), "w") as f:
            json.dump(meta, f, indent=2, sort_keys=True)
            f.write("\n")


def mese(sub, inherit):
    d = os.path.join(ROOT, "sub-" + sub, "ses-1", "anat")
    common = {"RepetitionTime": 3.0, "MagneticFieldStrength": 1.5, "FlipAngle": 90,
              "SeriesDescription": "invented MESE", "PulseSequenceType": "multi-echo spin echo"}
    if inherit:
        os.makedirs(os.path.join(ROOT, "sub-" + sub, "ses-1"), exist_ok=True)
        with open(os.path.join(ROOT, "sub-" + sub, "ses-1", "sub-%s_ses-1_MESE.json" % sub), "w") as f:
            json.dump(common, f, indent=2, sort_keys=True)
            f.write("\n")
    for e in range(1, 7):
        te = 10.0 * e  # ms
        clean = np.where(inside, 1000 * np.exp(-te / T2), 0)
        meta = {"EchoTime": te / 1000}
        if not inherit:
            meta.update(common)
        save(os.path.join(d, "sub-%s_ses-1_echo-%d_MESE.nii.gz" % (sub, e)), magnitude(clean), meta)


def irt1(sub):
    d = os.path.join(ROOT, "sub-" + sub, "ses-1", "anat")
    for n, ti in enumerate([100.0, 400.0, 1000.0, 2400.0], 1):
        clean = np.where(inside, np.abs(1000 * (1 - 2 * np.exp(-ti / T1))), 0)
        meta = {"InversionTime": ti / 1000, "RepetitionTime": 10.0, "EchoTime": 0.01,
                "MagneticFieldStrength": 1.5, "SeriesDescription": "invented IR"}
        save(os.path.join(d, "sub-%s_ses-1_inv-%d_part-mag_IRT1.nii.gz" % (sub, n)), magnitude(clean), meta)
        if n == 1:
            phase = np.where(clean > 0, 0.0, np.pi).astype(np.float32)
            save(os.path.join(d, "sub-%s_ses-1_inv-%d_part-phase_IRT1.nii.gz" % (sub, n)), phase, meta)


os.makedirs(ROOT, exist_ok=True)
with open(os.path.join(ROOT, "dataset_description.json"), "w") as f:
    json.dump({"Name": "tauvox invented relaxometry test set", "BIDSVersion": "1.10.0",
               "DatasetType": "raw", "License": "CC0"}, f, indent=2)
    f.write("\n")
with open(os.path.join(ROOT, "participants.tsv"), "w") as f:
    f.write("participant_id\nsub-01\nsub-02\n")
mese("01", False)
irt1("01")
mese("02", True)
