#!/usr/bin/python3
"""Make the small NIfTI reference files in testdata/nifti/ with nibabel and
write testdata/nifti/refs.json with what nibabel reads back from them.

Run from the repository root:  /usr/bin/python3 testdata/gen/nifti_refs.py
Tested with Debian python3-nibabel 5.0.0 and python3-numpy 1.24.2.

Expected values are those nibabel itself reports after loading each file
(shape, get_qform/get_sform with their codes, get_fdata), so the Go reader is
compared with an independent implementation. For "affine_mm" the script
applies the rules tauvox documents (sform if sform_code > 0, else qform if
qform_code > 0, else nifti1.h method 1 diag(pixdim); scaled to millimetres
from xyzt_units); nibabel does neither the unit scaling nor method 1 (its
fallback centres the grid), so those two steps are computed here.
"""
import gzip
import hashlib
import json
import os

import nibabel as nib
import numpy as np

OUT = os.path.join("testdata", "nifti")
os.makedirs(OUT, exist_ok=True)


def rot(axis, deg):
    t = np.deg2rad(deg)
    c, s = np.cos(t), np.sin(t)
    r = np.eye(4)
    i, j = [(1, 2), (0, 2), (0, 1)][axis]
    r[i, i], r[i, j], r[j, i], r[j, j] = c, -s, s, c
    return r


def affine(zooms, offset, r=None, flip=False):
    a = np.diag(list(zooms) + [1.0])
    if flip:  # negative determinant: k axis reversed
        a[:, 2] *= -1
    if r is not None:
        a = r @ a
    a[:3, 3] = offset
    return a


def ramp(shape, dtype, scale=1.0, shift=0.0):
    n = int(np.prod(shape))
    v = (np.arange(n) * scale + shift).reshape(shape, order="F")
    return v.astype(dtype)


OBLIQUE = rot(2, 30) @ rot(0, -12)          # 30 deg about z after -12 deg about x
SHEAR = np.array([[1.2, 0.3, 0.0, -40.0],   # non-orthogonal (sform only)
                  [0.0, 0.9, 0.2, 12.5],
                  [0.1, 0.0, 2.5, 7.0],
                  [0.0, 0.0, 0.0, 1.0]])

refs = []


def record(name, note):
    path = os.path.join(OUT, name)
    img = nib.load(path)
    # nib.load moves scaling into the data proxy and resets vox_offset, so
    # take the header fields from the raw header bytes.
    opener = gzip.open if name.endswith(".gz") else open
    klass = nib.Nifti2Header if isinstance(img.header, nib.Nifti2Header) else nib.Nifti1Header
    with opener(path, "rb") as f:
        hdr = klass.from_fileobj(f)
    data = np.asarray(img.get_fdata(), dtype=np.float64)
    shape = list(img.shape) + [1] * (4 - len(img.shape))
    qcode = int(hdr["qform_code"])
    scode = int(hdr["sform_code"])
    if scode > 0:
        aff = hdr.get_sform()
    elif qcode > 0:
        aff = hdr.get_qform()
    else:  # nifti1.h method 1
        z = hdr["pixdim"][1:4]
        aff = np.diag(list(z) + [1.0])
    space = int(hdr["xyzt_units"]) & 7
    mm = {1: 1000.0, 3: 0.001}.get(space, 1.0)
    aff = np.array(aff, dtype=np.float64)
    aff[:3, :] *= mm
    slope, inter = hdr.get_slope_inter()
    with open(path, "rb") as f:
        raw = f.read()
    refs.append({
        "file": name,
        "note": note,
        "version": 2 if isinstance(hdr, nib.Nifti2Header) else 1,
        "big_endian": hdr.endianness == ">",
        "datatype": int(hdr["datatype"]),
        "dims": shape,
        "pixdim": [float(x) for x in hdr["pixdim"]],
        "vox_offset": int(hdr["vox_offset"]),
        "xyzt_units": int(hdr["xyzt_units"]),
        "scl_slope": None if slope is None else float(slope),
        "scl_inter": None if inter is None else float(inter),
        "descrip": hdr["descrip"].item().decode("ascii"),
        "qform_code": qcode,
        "sform_code": scode,
        "qform": hdr.get_qform().tolist(),
        "sform": hdr.get_sform().tolist(),
        "affine_mm": aff.tolist(),
        "data": data.ravel(order="F").tolist(),
        "sha256": hashlib.sha256(raw).hexdigest(),
    })


def save(img, name, qcode, scode, descrip, note, units=("mm", "sec")):
    hdr = img.header
    a = img.affine
    hdr.set_qform(a if qcode else None, code=qcode)
    hdr.set_sform(a if scode else None, code=scode)
    hdr.set_xyzt_units(*units)
    hdr["descrip"] = descrip
    nib.save(img, os.path.join(OUT, name))
    record(name, note)


def save_raw(hdr, data, name, note):
    """Write header + extension flag + samples directly, so that the
    scaling fields stay exactly as set (nib.save recomputes them)."""
    hdr.set_data_shape(data.shape)
    hdr.set_data_dtype(data.dtype)
    with open(os.path.join(OUT, name), "wb") as f:
        hdr.write_to(f)
        f.write(b"\0" * (int(hdr["vox_offset"]) - f.tell()))
        f.write(data.astype(hdr.get_data_dtype()).tobytes(order="F"))
    record(name, note)


# int16 with scl_slope/scl_inter: nibabel applies value = slope*stored + inter.
h = nib.Nifti1Header()
a = affine((2.0, 2.0, 3.0), (-10.0, 20.0, 5.0))
h.set_qform(a, code=1)
h.set_sform(a, code=1)
h.set_xyzt_units("mm", "sec")
h["vox_offset"] = 352
h["descrip"] = b"int16 scaled"
h.set_slope_inter(0.5, -10.0)
save_raw(h, ramp((4, 3, 2), np.int16, 7, -60), "i16_scaled.nii", "int16, scl_slope 0.5, scl_inter -10")

# The other integer and float types, oblique axes.
for name, dt, scale, shift in [
    ("u8.nii", np.uint8, 10, 5),
    ("i8.nii", np.int8, 9, -100),
    ("u16.nii", np.uint16, 5000, 3),
    ("i32.nii", np.int32, -123457, 99),
    ("u32.nii", np.uint32, 301, 4000000000 - 10000),
    ("i64.nii", np.int64, 1000003, -5000000),
    ("f64.nii", np.float64, 0.125, -1.0 / 3.0),
]:
    img = nib.Nifti1Image(ramp((3, 4, 2), dt, scale, shift), affine((0.9, 0.9, 4.0), (100.0, -80.5, 33.0), OBLIQUE),
                          dtype=dt)
    save(img, name, 1, 1, np.dtype(dt).name, np.dtype(dt).name + ", oblique, qform and sform")

# Big-endian int16 and big-endian NIfTI-2 float32.
img = nib.Nifti1Image(ramp((3, 2, 2), ">i2", -1000, 321), affine((1.5, 1.5, 2.0), (1.0, 2.0, 3.0)),
                      header=nib.Nifti1Header(endianness=">"))
save(img, "be_i16.nii", 1, 1, "big endian", "big-endian int16")
img = nib.Nifti2Image(ramp((2, 3, 2), ">f4", 1.5, -2.25), affine((1.0, 1.0, 1.0), (0.0, 0.0, 0.0), OBLIQUE),
                      header=nib.Nifti2Header(endianness=">"))
save(img, "be_n2_f32.nii", 1, 1, "big endian nifti2", "big-endian NIfTI-2 float32")

# NIfTI-2 float32, little-endian.
img = nib.Nifti2Image(ramp((4, 3, 2), np.float32, 0.37, 1e3), affine((0.5, 0.6, 0.7), (-1.0, -2.0, -3.0), OBLIQUE))
save(img, "n2_f32.nii", 1, 1, "nifti2", "NIfTI-2 float32")

# gzip-compressed 3-D and 4-D float32.
img = nib.Nifti1Image(ramp((5, 4, 3), np.float32, -0.75, 12.0), affine((1.1, 1.2, 1.3), (5.0, 6.0, 7.0)))
save(img, "f32.nii.gz", 1, 1, "gzip", "gzip float32")
img = nib.Nifti1Image(ramp((3, 3, 2, 4), np.float32, 2.5, 0.0), affine((2.0, 2.0, 2.0), (-3.0, 4.0, -5.0), OBLIQUE))
img.header.set_zooms((2.0, 2.0, 2.0, 1.5))
save(img, "f32_4d.nii.gz", 1, 1, "four-d", "gzip 4-D float32, pixdim[4] 1.5 s")

# Oblique qform only, negative determinant (qfac -1).
img = nib.Nifti1Image(ramp((3, 2, 4), np.float32, 1.0, 0.0), affine((0.8, 0.5, 2.0), (100.0, 120.0, 30.0), OBLIQUE, flip=True))
save(img, "qform_only.nii", 1, 0, "qform only", "oblique qform, qfac -1, sform_code 0")

# Non-orthogonal sform only (code 2, aligned).
img = nib.Nifti1Image(ramp((2, 3, 2), np.float32, -1.0, 5.0), SHEAR)
save(img, "sform_only.nii", 0, 2, "sform only", "sheared sform, qform_code 0")

# Neither transform: nifti1.h method 1.
# (nib.save would set an "aligned" sform, so write the bytes directly.)
h = nib.Nifti1Header()
h["pixdim"][1:4] = (1.5, 2.5, 3.5)
h["vox_offset"] = 352
h.set_xyzt_units("mm", "sec")
h["descrip"] = b"no transform"
save_raw(h, ramp((2, 2, 2), np.int16, 3, 0), "no_xform.nii", "qform_code 0 and sform_code 0")

# Spatial unit micrometres: the affine must come out in mm.
img = nib.Nifti1Image(ramp((2, 2, 2), np.float32, 1.0, 0.0), affine((500.0, 500.0, 1000.0), (1000.0, -2000.0, 3000.0)))
save(img, "units_um.nii", 1, 1, "microns", "xyzt_units micron", units=("micron", "msec"))

# One extension between header and samples (vox_offset > 352).
img = nib.Nifti1Image(ramp((2, 3, 2), np.float32, 0.5, 0.0), affine((1.0, 1.0, 1.0), (0.0, 0.0, 0.0)))
img.header.extensions.append(nib.nifti1.Nifti1Extension("comment", b"tauvox test extension"))
save(img, "ext.nii", 1, 1, "extension", "one comment extension")

# .hdr/.img pair.
img = nib.Nifti1Pair(ramp((3, 2, 2), np.int16, 11, -7), affine((1.0, 2.0, 3.0), (9.0, 8.0, 7.0)), dtype=np.int16)
save(img, "pair_i16.hdr", 1, 1, "pair", "Nifti1Pair .hdr/.img")

for r in refs:
    assert os.path.getsize(os.path.join(OUT, r["file"])) < 8192, r["file"]
with open(os.path.join(OUT, "refs.json"), "w") as f:
    json.dump({"source": "nibabel %s, numpy %s, script testdata/gen/nifti_refs.py" % (nib.__version__, np.__version__),
               "files": refs}, f, indent=1)
    f.write("\n")
print("wrote %d files" % len(refs))
