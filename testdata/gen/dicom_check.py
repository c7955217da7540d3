#!/usr/bin/python3
"""Check with pydicom and nibabel the DICOM files tauvox wrote into
testdata/dicom/written-by-tauvox/ (made by `go test ./io/dicom -run
WrittenByTauvox -update`), against expected.json written beside them.

Run from the repository root:
    /usr/bin/python3 testdata/gen/dicom_check.py > testdata/dicom/written-by-tauvox/dicom_check.txt
Tested with Debian python3-pydicom 2.3.1, python3-nibabel 5.0.0 and
python3-numpy 1.24.2.

classic: pydicom must read every file; the files sorted by position along
the slice normal and by EchoTime must give the samples tauvox reads back
(nibabel's scaled get_data(), rows x columns); nibabel's affine of the first
slice (LPS, (row, col) axes) after the column swap and diag(-1,-1,1,1), with
the slice column from the sorted positions, must equal tauvox's RAS affine.
enhanced: pydicom's pixel_array with the per-frame Pixel Value
Transformation must give the samples; the affine from the functional groups
(PS3.3 Eq. C.7.6.2.1-1) must equal tauvox's.
"""
import glob
import json
import os
import warnings

import numpy as np
import pydicom

warnings.simplefilter("ignore")
import nibabel  # noqa: E402
from nibabel.nicom import dicomwrappers  # noqa: E402

DIR = os.path.join("testdata", "dicom", "written-by-tauvox")
exp = json.load(open(os.path.join(DIR, "expected.json")))
print("pydicom %s, nibabel %s, numpy %s, script testdata/gen/dicom_check.py"
      % (pydicom.__version__, nibabel.__version__, np.__version__))
fails = 0


def check(ok, what):
    global fails
    print("  %-4s %s" % ("ok" if ok else "FAIL", what))
    fails += not ok


def to_ras(a):
    return np.diag([-1, -1, 1, 1]) @ a


# classic
e = exp["classic"]
nx, ny, nz, nt = e["dims"]
want = np.array(e["data"], dtype=np.float32).reshape(nt, nz, ny, nx)
aff = np.array(e["affine_ras"])
print("classic:")
files = sorted(glob.glob(os.path.join(DIR, "classic", "*")))
ds = [pydicom.dcmread(f) for f in files]
check(all(d.SOPClassUID == "1.2.840.10008.5.1.4.1.1.4" for d in ds), "MR Image Storage, %d files" % len(ds))
check(all(d.file_meta.TransferSyntaxUID == "1.2.840.10008.1.2.1" for d in ds), "explicit VR little endian")
iop = np.array(ds[0].ImageOrientationPatient, float)
n = np.cross(iop[:3], iop[3:])
pos = sorted({round(float(np.dot(n, np.array(d.ImagePositionPatient, float))), 6) for d in ds})
tes = sorted({float(d.EchoTime) for d in ds})
check(len(pos) == nz and len(tes) == nt, "%d positions, %d echo times" % (len(pos), len(tes)))
got = np.zeros_like(want)
first = None
for f, d in zip(files, ds):
    k = pos.index(round(float(np.dot(n, np.array(d.ImagePositionPatient, float))), 6))
    t = tes.index(float(d.EchoTime))
    got[t, k] = dicomwrappers.wrapper_from_file(f).get_data()
    if k == 0 and t == 0:
        first = f
check(np.allclose(got, want, rtol=0, atol=1e-4), "samples (nibabel get_data) equal tauvox's, max diff %.2g" % abs(got - want).max())
a = np.array(dicomwrappers.wrapper_from_file(first).affine)
a[:, [0, 1]] = a[:, [1, 0]]
last = [d for d in ds if round(float(np.dot(n, np.array(d.ImagePositionPatient, float))), 6) == pos[-1]][0]
a[:3, 2] = (np.array(last.ImagePositionPatient, float) - a[:3, 3]) / (nz - 1)
check(np.allclose(to_ras(a), aff, atol=1e-6), "nibabel affine equals tauvox's (max diff %.2g mm)" % abs(to_ras(a) - aff).max())
check(all(str(d.PatientName) == "PHANTOM^TAUVOX" and "PatientBirthDate" in d and d.PatientBirthDate == "" for d in ds),
      "only placeholder patient attributes")

# enhanced
e = exp["enhanced"]
nx, ny, nz, nt = e["dims"]
want = np.array(e["data"], dtype=np.float32).reshape(nt, nz, ny, nx)
aff = np.array(e["affine_ras"])
print("enhanced:")
files = glob.glob(os.path.join(DIR, "enhanced", "*"))
check(len(files) == 1, "one file")
d = pydicom.dcmread(files[0])
check(d.SOPClassUID == "1.2.840.10008.5.1.4.1.1.4.1", "Enhanced MR Image Storage")
check(int(d.NumberOfFrames) == nz * nt, "%s frames" % d.NumberOfFrames)
arr = d.pixel_array.astype(float)
sh = d.SharedFunctionalGroupsSequence[0]
iop = np.array(sh.PlaneOrientationSequence[0].ImageOrientationPatient, float)
ps = np.array(sh.PixelMeasuresSequence[0].PixelSpacing, float)
n = np.cross(iop[:3], iop[3:])
frames = []
for f, g in enumerate(d.PerFrameFunctionalGroupsSequence):
    ipp = np.array(g.PlanePositionSequence[0].ImagePositionPatient, float)
    te = float(g.MREchoSequence[0].EffectiveEchoTime)
    pv = g.PixelValueTransformationSequence[0]
    frames.append((te, float(np.dot(n, ipp)), ipp, float(pv.RescaleSlope) * arr[f] + float(pv.RescaleIntercept)))
tes = sorted({fr[0] for fr in frames})
pos = sorted({round(fr[1], 6) for fr in frames})
got = np.zeros_like(want)
for te, s, ipp, v in frames:
    got[tes.index(te), pos.index(round(s, 6))] = v
check(np.allclose(got, want, rtol=0, atol=1e-4), "samples (pydicom, per-frame rescale) equal tauvox's, max diff %.2g" % abs(got - want).max())
ipps = {round(fr[1], 6): fr[2] for fr in frames}
a = np.eye(4)
a[:3, 0] = iop[:3] * ps[1]
a[:3, 1] = iop[3:] * ps[0]
a[:3, 2] = (ipps[pos[-1]] - ipps[pos[0]]) / (nz - 1)
a[:3, 3] = ipps[pos[0]]
check(np.allclose(to_ras(a), aff, atol=1e-6), "PS3.3 Eq. C.7.6.2.1-1 affine equals tauvox's (max diff %.2g mm)" % abs(to_ras(a) - aff).max())
print("FAILURES: %d" % fails)
