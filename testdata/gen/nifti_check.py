#!/usr/bin/python3
"""Check with nibabel the files tauvox wrote into
testdata/nifti/written-by-tauvox/ (made by `go test ./io/nifti -run
WrittenByTauvox -update`), against expected.json written beside them.

Run from the repository root:
    /usr/bin/python3 testdata/gen/nifti_check.py > testdata/nifti/written-by-tauvox/nifti_check.txt
Tested with Debian python3-nibabel 5.0.0 and python3-numpy 1.24.2.

For each file: nibabel must load it, report the datatype, shape and
version, qform_code = sform_code = 1, get_sform equal to the affine tauvox
was given (float32 precision for NIfTI-1), get_qform equal to the qform
tauvox reports (the nearest rigid transform; equal to the affine when that is
rigid), and the same samples (NaN where tauvox wrote NaN).
"""
import json
import os

import nibabel as nib
import numpy as np

DIR = os.path.join("testdata", "nifti", "written-by-tauvox")
exp = json.load(open(os.path.join(DIR, "expected.json")))
print("nibabel %s, numpy %s, script testdata/gen/nifti_check.py" % (nib.__version__, np.__version__))
fails = 0


def check(ok, what):
    global fails
    print("  %-4s %s" % ("ok" if ok else "FAIL", what))
    if not ok:
        fails += 1


for name in sorted(exp):
    e = exp[name]
    img = nib.load(os.path.join(DIR, name))
    hdr = img.header
    print(name)
    version = 2 if isinstance(hdr, nib.Nifti2Header) else 1
    tol = 1e-6 if version == 1 else 1e-12
    check(version == e["version"], "version %d" % version)
    check(int(hdr["datatype"]) == e["datatype"], "datatype %d (%s)" % (int(hdr["datatype"]), hdr.get_data_dtype()))
    shape = list(img.shape) + [1] * (4 - len(img.shape))
    check(shape == e["dims"], "shape %s" % (img.shape,))
    q, qc = hdr.get_qform(coded=True)
    s, sc = hdr.get_sform(coded=True)
    check(int(qc) == 1 and int(sc) == 1, "qform_code %d, sform_code %d" % (qc, sc))
    a = np.array(e["affine"])
    check(np.allclose(s, a, rtol=tol, atol=tol), "get_sform equals the affine (max diff %.2g)" % np.abs(s - a).max())
    eq = np.array(e["qform"])
    check(np.allclose(q, eq, rtol=tol, atol=tol), "get_qform equals tauvox's qform (max diff %.2g)" % np.abs(q - eq).max())
    rigid = np.allclose(eq, a, rtol=tol, atol=tol)
    print("       qform %s the affine (affine %s)" % ("equals" if rigid else "differs from", "rigid" if rigid else "not rigid"))
    # Independent check of the polar decomposition: the qform rotation must
    # be U·Vᵀ from numpy's SVD of the column-normalised 3x3 part (nearest
    # orthogonal matrix), with the voxel sizes the column norms.
    m = a[:3, :3]
    z = np.linalg.norm(m, axis=0)
    u, _, vt = np.linalg.svd(m / z)
    r = u @ vt
    check(np.allclose(q[:3, :3], r * z, rtol=1e-6, atol=1e-6),
          "get_qform = nearest orthogonal (numpy SVD) x column norms (max diff %.2g)" % np.abs(q[:3, :3] - r * z).max())
    check(float(hdr["pixdim"][0]) == e["qfac"], "qfac %g" % hdr["pixdim"][0])
    check(hdr["descrip"].item().decode() == e["descrip"], "descrip %r" % hdr["descrip"].item().decode())
    check(int(hdr["vox_offset"]) == e["vox_offset"] or int(img.dataobj.offset) == e["vox_offset"],
          "data offset %d" % img.dataobj.offset)
    check(hdr.get_xyzt_units() == ("mm", "msec"), "xyzt_units %s" % (hdr.get_xyzt_units(),))
    if len(img.shape) > 3:
        check(float(hdr["pixdim"][4]) == e["pixdim4"], "pixdim[4] %g" % hdr["pixdim"][4])
    d = np.asarray(img.get_fdata()).ravel(order="F")
    want = np.array([np.nan if v is None else v for v in e["data"]])
    check(np.array_equal(d, want, equal_nan=True), "%d samples equal (%d NaN)" % (d.size, np.isnan(d).sum()))

print("ALL OK" if fails == 0 else "%d FAILED" % fails)
