#!/usr/bin/python3
"""Check with pydicom the Parametric Map tauvox wrote into
testdata/dicom/exported-by-tauvox/ (made by `go test ./io/dicom -run
ExportedByTauvox -update`) against expected.json written beside it.

Run from the repository root:
    /usr/bin/python3 testdata/gen/dicom_export_check.py > testdata/dicom/exported-by-tauvox/dicom_export_check.txt
Tested with Debian python3-pydicom 2.3.1 and python3-numpy 1.24.2.

Checks: SOP class Parametric Map Storage and explicit VR little endian
(check-values §3.3); Float Pixel Data (7FE0,0008) read by pydicom's
pixel_array (frames, rows, columns) equals the map as written (NaN where
expected.json has null); the Real World Value Mapping has slope 1,
intercept 0 and the unit code ("ms", "UCUM") (check-values §3.2); the
identity Pixel Value Transformation; the affine from the functional groups
by PS3.3 Eq. C.7.6.2.1-1 with diag(-1,-1,1,1) (check-values §3.4) equals
tauvox's RAS affine; no patient identifier has a value.
"""
import json
import os

import numpy as np
import pydicom

DIR = os.path.join("testdata", "dicom", "exported-by-tauvox")
exp = json.load(open(os.path.join(DIR, "expected.json")))
print("pydicom %s, numpy %s, script testdata/gen/dicom_export_check.py" % (pydicom.__version__, np.__version__))
fails = 0


def check(ok, what):
    global fails
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        fails += 1


ds = pydicom.dcmread(os.path.join(DIR, "T2map.dcm"))
check(ds.SOPClassUID == "1.2.840.10008.5.1.4.1.1.30", "SOPClassUID %s (Parametric Map Storage)" % ds.SOPClassUID)
check(ds.file_meta.TransferSyntaxUID == "1.2.840.10008.1.2.1", "transfer syntax %s (explicit VR little endian)" % ds.file_meta.TransferSyntaxUID)
check("FloatPixelData" in ds and "PixelData" not in ds, "Float Pixel Data (7FE0,0008) only")
check(ds.BitsAllocated == 32, "BitsAllocated 32")
check(list(ds.ImageType)[:2] == ["DERIVED", "PRIMARY"], "ImageType %s" % "\\".join(ds.ImageType))
nx, ny, nz = exp["dims"][:3]
arr = ds.pixel_array
check(arr.dtype == np.float32 and arr.shape == (nz, ny, nx), "pixel_array %s %s" % (arr.dtype, arr.shape))
want = np.array([np.nan if v is None else v for v in exp["data"]], dtype=np.float32).reshape(nz, ny, nx)
same = np.array_equal(np.isnan(arr), np.isnan(want)) and np.array_equal(arr[~np.isnan(arr)], want[~np.isnan(want)])
check(same, "values equal the map as written, bit for bit (%d NaN)" % int(np.isnan(arr).sum()))

sh = ds.SharedFunctionalGroupsSequence[0]
rw = sh.RealWorldValueMappingSequence[0]
u = rw.MeasurementUnitsCodeSequence[0]
check(rw.RealWorldValueSlope == 1.0 and rw.RealWorldValueIntercept == 0.0, "real world value = 1 x stored + 0")
check((u.CodeValue, u.CodingSchemeDesignator) == ("ms", "UCUM"), "unit %s %s (%s)" % (u.CodeValue, u.CodingSchemeDesignator, u.CodeMeaning))
finite = want[~np.isnan(want)]
check(rw[0x00409214].value == float(finite.min()) and rw[0x00409213].value == float(finite.max()),
      "first/last value mapped %g..%g" % (rw[0x00409214].value, rw[0x00409213].value))
pv = sh.PixelValueTransformationSequence[0]
check(float(pv.RescaleSlope) == 1 and float(pv.RescaleIntercept) == 0, "identity pixel value transformation")
check(len(ds.PerFrameFunctionalGroupsSequence) == nz == int(ds.NumberOfFrames), "%d frames" % nz)

iop = np.array(sh.PlaneOrientationSequence[0].ImageOrientationPatient, dtype=float)
ps = np.array(sh.PixelMeasuresSequence[0].PixelSpacing, dtype=float)
ipp = [np.array(f.PlanePositionSequence[0].ImagePositionPatient, dtype=float) for f in ds.PerFrameFunctionalGroupsSequence]
A = np.eye(4)
A[:3, 0] = iop[:3] * ps[1]
A[:3, 1] = iop[3:] * ps[0]
A[:3, 2] = (ipp[-1] - ipp[0]) / (len(ipp) - 1)
A[:3, 3] = ipp[0]
A = np.diag([-1, -1, 1, 1]) @ A
err = np.abs(A - np.array(exp["affine_ras"])).max()
check(err < 1e-4, "affine from the functional groups equals tauvox's RAS affine (max diff %.2g mm)" % err)
check(all(str(ds.get(k, "")) == "" for k in ("PatientName", "PatientID", "PatientBirthDate", "AccessionNumber")),
      "no patient identifier has a value")
print("%d failures" % fails)
