#!/usr/bin/python3
"""Generate the DICOM test files of io/dicom and their expected values.

Writer: pydicom 2.3.1 (Debian python3-pydicom), numpy 1.24; reference
geometry and scaled pixel values: nibabel 5.0.0 (nibabel.nicom.dicomwrappers)
and an independent numpy evaluation of DICOM PS3.3 Eq. C.7.6.2.1-1.
Everything is invented test data (a synthetic relaxation phantom); no patient
data. Run from the repository root:

    /usr/bin/python3 testdata/gen/dicom_refs.py

It rewrites testdata/dicom/ (files and refs.json). The output is
deterministic (seeded), so a rerun gives the same bytes apart from nothing.

Contents
  mix/       (a) oblique multi-echo spin echo, uint16 + rescale, shuffled
                 names in nested folders;
             (b) multi-echo gradient echo, int16, implicit VR little endian;
             (c) a localizer; (d) a text file, a binary file and a 0-byte file.
  enhanced/  (e) one Enhanced MR multi-frame file (4 echoes x 3 slices),
                 frames shuffled, per-frame rescale.
  ir/        (f) inversion recovery (4 TIs x 3 slices), deflated explicit VR
                 little endian (transfer syntax 1.2.840.10008.1.2.1.99).
  compressed/ (h) JPEG Baseline transfer syntax with encapsulated bogus bytes.
  broken/truncated/  a 2x2 series with one file cut inside its pixel data
  broken/missing/    a 3x3 series with (slice 2, echo 3) left out
  broken/matrix/     a 2x2 series with one file of a different matrix size
  broken/uneven/     3 slices at 0, 3 and 7 mm
"""

import json
import os
import random
import shutil
import uuid
import warnings

import numpy as np
import pydicom
from pydicom.dataset import Dataset, FileDataset, FileMetaDataset
from pydicom.encaps import encapsulate
from pydicom.sequence import Sequence
from pydicom.uid import (ExplicitVRLittleEndian, ImplicitVRLittleEndian,
                         DeflatedExplicitVRLittleEndian, JPEGBaseline8Bit)

warnings.simplefilter("ignore")  # nibabel's "DICOM readers are experimental"
import nibabel  # noqa: E402
from nibabel.nicom import dicomwrappers  # noqa: E402

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "dicom")
MR = "1.2.840.10008.5.1.4.1.1.4"
ENH_MR = "1.2.840.10008.5.1.4.1.1.4.1"
rng = random.Random(20240521)
nrng = np.random.default_rng(20240521)


def new_uid():
    # PS3.5 B.2: UUID-derived UID under the 2.25 root.
    return "2.25." + str(uuid.UUID(int=rng.getrandbits(128)).int)


def rand_name():
    return "%016x" % rng.getrandbits(64)


def rotation(az, el, roll):
    """Rotation matrix from three angles in degrees (z, then x, then y)."""
    a, b, c = np.radians([az, el, roll])
    rz = np.array([[np.cos(a), -np.sin(a), 0], [np.sin(a), np.cos(a), 0], [0, 0, 1]])
    rx = np.array([[1, 0, 0], [0, np.cos(b), -np.sin(b)], [0, np.sin(b), np.cos(b)]])
    ry = np.array([[np.cos(c), 0, np.sin(c)], [0, 1, 0], [-np.sin(c), 0, np.cos(c)]])
    return rz @ rx @ ry


def ds_str(v):
    """A DS value of at most 16 characters (PS3.5 Table 6.2-1)."""
    s = "%.10g" % v
    if len(s) > 16:
        s = "%.8g" % v
    return s


def base_dataset(sop_class, ts, series):
    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = sop_class
    sop = new_uid()
    meta.MediaStorageSOPInstanceUID = sop
    meta.TransferSyntaxUID = ts
    meta.ImplementationClassUID = "2.25.1234567890123456789"
    ds = FileDataset(None, {}, file_meta=meta, preamble=b"\0" * 128)
    ds.is_little_endian = True
    ds.is_implicit_VR = ts == ImplicitVRLittleEndian
    ds.SpecificCharacterSet = "ISO_IR 100"
    ds.SOPClassUID = sop_class
    ds.SOPInstanceUID = sop
    ds.StudyInstanceUID = series["study"]
    ds.SeriesInstanceUID = series["uid"]
    ds.FrameOfReferenceUID = series["for"]
    ds.Modality = "MR"
    ds.Manufacturer = "Invented Instruments"
    ds.ManufacturerModelName = "Model Zero"
    ds.StationName = "BENCH-7"
    ds.MagneticFieldStrength = "3"
    ds.PatientName = "Phantom^Test"
    ds.PatientID = "PHANTOM-001"
    ds.PatientBirthDate = "19000101"
    ds.AccessionNumber = "ACC0001"
    ds.StudyDate = "20240521"
    ds.StudyTime = "090000"
    ds.SeriesDate = "20240521"
    ds.SeriesTime = series.get("time", "091500")
    ds.AcquisitionDate = "20240521"
    ds.AcquisitionTime = series.get("time", "091500")
    ds.SeriesNumber = str(series["number"])
    ds.SeriesDescription = series["desc"]
    ds.SamplesPerPixel = 1
    ds.PhotometricInterpretation = "MONOCHROME2"
    return ds


def set_pixels(ds, stored, signed):
    ds.Rows, ds.Columns = stored.shape
    ds.BitsAllocated = 16
    ds.BitsStored = 16
    ds.HighBit = 15
    ds.PixelRepresentation = 1 if signed else 0
    ds.PixelData = stored.astype("<i2" if signed else "<u2").tobytes()


def classic_series(spec):
    """Write one single-frame series; return its reference record."""
    rot = rotation(*spec["angles"])
    x, y = rot[:, 0], rot[:, 1]          # row direction X, column direction Y (LPS)
    n = np.cross(x, y)
    rows, cols = spec["rows"], spec["cols"]
    ps = spec["spacing"]                  # [row spacing, column spacing]
    ipp0 = np.array(spec["ipp0"], float)
    nz = spec["slices"]
    offsets = spec.get("offsets", [k * spec["step"] for k in range(nz)])
    params = spec["params"]               # list of dicts per volume (ascending)
    truth = spec["truth"]                 # function (i, j, k) -> dict of truth values
    signal = spec["signal"]               # function (truth, params) -> value
    slope, icpt = spec["slope"], spec["intercept"]
    signed = spec["signed"]
    files = []
    iop = [float(ds_str(v)) for v in list(x) + list(y)]
    order = list(range(nz))
    rng.shuffle(order)                    # write slices in a shuffled order
    inst = list(range(1, nz * len(params) + 1))
    rng.shuffle(inst)                     # meaningless InstanceNumbers
    expect = np.zeros((len(params), nz, rows, cols))
    for t, p in enumerate(params):
        for k in order:
            ipp = ipp0 + offsets[k] * n
            ipp = [float(ds_str(v)) for v in ipp]
            val = np.zeros((rows, cols))
            for j in range(rows):
                for i in range(cols):
                    val[j, i] = signal(truth(i, j, k), p)
            stored = np.round((val - icpt) / slope)
            ds = base_dataset(MR, spec["ts"], spec)
            ds.ImageType = spec.get("image_type", ["ORIGINAL", "PRIMARY", "M", "ND"])
            ds.ScanningSequence = spec["seq"]
            ds.SequenceVariant = "NONE"
            ds.SequenceName = spec.get("seqname", "")
            ds.InstanceNumber = str(inst.pop())
            ds.ImagePositionPatient = [ds_str(v) for v in ipp]
            ds.ImageOrientationPatient = [ds_str(v) for v in iop]
            ds.PixelSpacing = [ds_str(v) for v in ps]
            ds.SliceThickness = ds_str(spec["thickness"])
            ds.SpacingBetweenSlices = ds_str(spec["step"])
            ds.EchoTime = ds_str(p.get("te", 10))
            ds.RepetitionTime = ds_str(p.get("tr", 3000))
            ds.FlipAngle = ds_str(p.get("fa", 90))
            if "ti" in p:
                ds.InversionTime = ds_str(p["ti"])
            ds.EchoNumbers = str(p.get("echo", 1))
            ds.RescaleSlope = ds_str(slope)
            ds.RescaleIntercept = ds_str(icpt)
            ds.RescaleType = "US"
            rr, cc = spec.get("matrix_override", {}).get((t, k), (rows, cols))
            if (rr, cc) != (rows, cols):
                stored = np.zeros((rr, cc)) + 7
            set_pixels(ds, stored, signed)
            folder = os.path.join(ROOT, spec["dir"], *[("%02x" % rng.getrandbits(8)) for _ in range(spec.get("depth", 0))])
            os.makedirs(folder, exist_ok=True)
            path = os.path.join(folder, rand_name())
            ds.save_as(path, write_like_original=False)
            files.append(dict(path=path, t=t, k=k, ipp=ipp))
            expect[t, k] = slope * stored + icpt if (rr, cc) == (rows, cols) else 0
    # Reference geometry from the files as written.
    # nibabel: the first two columns and the translation come from the
    # wrapper of the lowest slice; the slice column is the step between the
    # sorted positions (nibabel puts SliceThickness along the normal there).
    ss = sorted(files, key=lambda f: float(np.dot(n, f["ipp"])))
    first = [f for f in ss if f["t"] == 0][0]
    last = [f for f in ss if f["t"] == 0][-1]
    w = dicomwrappers.wrapper_from_file(first["path"])
    a_nib = np.array(w.affine)            # LPS, axes (row, col, slice)
    a_nib[:, [0, 1]] = a_nib[:, [1, 0]]   # -> (col, row, slice)
    step = (np.array(last["ipp"]) - np.array(first["ipp"])) / max(nz - 1, 1)
    if nz == 1:
        step = n * spec["thickness"]
    a_nib[:3, 2] = step
    a_nib = np.diag([-1, -1, 1, 1]) @ a_nib
    # numpy, PS3.3 Eq. C.7.6.2.1-1: P = S + X*di*i + Y*dj*j, di = PS[1], dj = PS[0].
    xa, ya = np.array(iop[:3]), np.array(iop[3:])
    a_np = np.eye(4)
    a_np[:3, 0] = xa * ps[1]
    a_np[:3, 1] = ya * ps[0]
    a_np[:3, 2] = step
    a_np[:3, 3] = first["ipp"]
    a_np = np.diag([-1, -1, 1, 1]) @ a_np
    assert np.allclose(a_nib, a_np, atol=1e-9), (a_nib, a_np)
    # Expected samples: nibabel's scaled data (rows, cols) of each file,
    # stacked in sorted slice order, i (column) fastest.
    kpos = sorted(range(nz), key=lambda k: offsets[k])
    data = np.zeros((len(params), nz, rows, cols))
    for f in files:
        if "skip" in spec and (f["t"], f["k"]) in spec["skip"]:
            continue
        try:
            d = dicomwrappers.wrapper_from_file(f["path"]).get_data()
        except Exception:
            continue
        if d.shape == (rows, cols):
            data[f["t"], kpos.index(f["k"])] = d
    assert np.allclose(data[:, kpos], expect[:, :]) or "skip" in spec or "matrix_override" in spec
    tr = {}
    for key in spec.get("truth_keys", []):
        tr[key] = [truth(i, j, k)[key] for k in kpos for j in range(rows) for i in range(cols)]
    return dict(
        uid=spec["uid"], number=spec["number"], description=spec["desc"],
        rows=rows, columns=cols, slices=nz, volumes=len(params),
        files=len(files),
        affine_nibabel=a_nib.tolist(), affine_numpy=a_np.tolist(),
        data=[round(float(v), 6) for v in data.reshape(-1)],
        truth=tr, paths=[os.path.relpath(f["path"], ROOT) for f in files],
        file_of={"%d,%d" % (f["t"], kpos.index(f["k"])): os.path.relpath(f["path"], ROOT) for f in files},
    )


def series_spec(number, desc, **kw):
    s = dict(uid=new_uid(), study=STUDY, number=number, desc=desc, depth=0,
             signed=False, ts=ExplicitVRLittleEndian, image_type=["ORIGINAL", "PRIMARY", "M", "ND"])
    s["for"] = FOR
    s.update(kw)
    return s


def t2_truth(i, j, k):
    return dict(T2=30.0 + 10.0 * (i // 4) + 20.0 * k + 5.0 * (j // 6), M0=1000.0 + 10.0 * j)


def t2s_truth(i, j, k):
    return dict(T2star=15.0 + 3.0 * i + 4.0 * k, M0=800.0)


def t1_truth(i, j, k):
    return dict(T1=300.0 + 50.0 * (i // 4) + 100.0 * k, M0=900.0)


def se(tr, p):
    return tr["M0"] * np.exp(-p["te"] / tr["T2"])


def gre(tr, p):
    return tr["M0"] * np.exp(-p["te"] / tr["T2star"])


def ir(tr, p):
    return abs(tr["M0"] * (1 - 2 * np.exp(-p["ti"] / tr["T1"])))


def enhanced(spec):
    """One Enhanced MR file with shuffled frames; return its record."""
    rot = rotation(*spec["angles"])
    x, y = rot[:, 0], rot[:, 1]
    n = np.cross(x, y)
    rows, cols, nz = spec["rows"], spec["cols"], spec["slices"]
    ps = spec["spacing"]
    tes = spec["tes"]
    iop = [float(ds_str(v)) for v in list(x) + list(y)]
    ipp0 = np.array(spec["ipp0"])
    frames = [(t, k) for t in range(len(tes)) for k in range(nz)]
    rng.shuffle(frames)
    ds = base_dataset(ENH_MR, ExplicitVRLittleEndian, spec)
    ds.ImageType = ["ORIGINAL", "PRIMARY", "M", "NONE"]
    ds.NumberOfFrames = str(len(frames))
    ds.InstanceNumber = "1"
    ds.ContentDate = "20240521"
    ds.ContentTime = "093000"
    ds.AcquisitionDateTime = "20240521093000.000000"
    ds.EchoPulseSequence = "SPIN"
    ds.ImageType = ["ORIGINAL", "PRIMARY", "MIXED", "NONE"]
    shared = Dataset()
    pm = Dataset()
    pm.PixelSpacing = [ds_str(v) for v in ps]
    pm.SliceThickness = ds_str(spec["thickness"])
    pm.SpacingBetweenSlices = ds_str(spec["step"])
    shared.PixelMeasuresSequence = Sequence([pm])
    po = Dataset()
    po.ImageOrientationPatient = [ds_str(v) for v in iop]
    shared.PlaneOrientationSequence = Sequence([po])
    tm = Dataset()
    tm.RepetitionTime = 2500.0
    tm.FlipAngle = 90.0
    tm.EchoTrainLength = len(tes)
    shared.MRTimingAndRelatedParametersSequence = Sequence([tm])
    ds.SharedFunctionalGroupsSequence = Sequence([shared])
    per = []
    stored_all = []
    expect = np.zeros((len(tes), nz, rows, cols))
    ipps = {}
    for f, (t, k) in enumerate(frames):
        g = Dataset()
        fc = Dataset()
        fc.DimensionIndexValues = [1, k + 1, t + 1]
        fc.StackID = "1"
        fc.InStackPositionNumber = k + 1
        fc.FrameAcquisitionNumber = t + 1
        g.FrameContentSequence = Sequence([fc])
        pp = Dataset()
        ipp = [float(ds_str(v)) for v in ipp0 + k * spec["step"] * n]
        ipps[k] = ipp
        pp.ImagePositionPatient = [ds_str(v) for v in ipp]
        g.PlanePositionSequence = Sequence([pp])
        me = Dataset()
        me.EffectiveEchoTime = float(tes[t])
        g.MREchoSequence = Sequence([me])
        ft = Dataset()
        ft.FrameType = ["ORIGINAL", "PRIMARY", "M", "NONE"]
        ft.ComplexImageComponent = "MAGNITUDE"
        g.MRImageFrameTypeSequence = Sequence([ft])
        val = np.array([[se(t2_truth(i, j, k), dict(te=tes[t])) for i in range(cols)] for j in range(rows)])
        slope = float(ds_str(0.02 * (1 + t)))   # per-frame rescale
        icpt = float(ds_str(-3.5))
        pv = Dataset()
        pv.RescaleSlope = ds_str(slope)
        pv.RescaleIntercept = ds_str(icpt)
        pv.RescaleType = "US"
        g.PixelValueTransformationSequence = Sequence([pv])
        per.append(g)
        stored = np.round((val - icpt) / slope)
        assert stored.max() < 65536 and stored.min() >= 0
        stored_all.append(stored.astype("<u2"))
        expect[t, k] = slope * stored + icpt
    ds.PerFrameFunctionalGroupsSequence = Sequence(per)
    dim = []
    for ptr, grp in [(0x00209056, 0x00209111), (0x00209057, 0x00209111), (0x00209153, 0x00189114)]:
        d = Dataset()
        d.DimensionIndexPointer = ptr
        d.FunctionalGroupPointer = grp
        dim.append(d)
    ds.DimensionIndexSequence = Sequence(dim)
    ds.Rows, ds.Columns = rows, cols
    ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 16, 16, 15, 0
    ds.PixelData = b"".join(s.tobytes() for s in stored_all)
    os.makedirs(os.path.join(ROOT, spec["dir"]), exist_ok=True)
    path = os.path.join(ROOT, spec["dir"], rand_name())
    ds.save_as(path, write_like_original=False)
    # numpy, PS3.3 Eq. C.7.6.2.1-1 (frames sorted by position along n).
    step = (np.array(ipps[nz - 1]) - np.array(ipps[0])) / (nz - 1)
    a_np = np.eye(4)
    a_np[:3, 0] = np.array(iop[:3]) * ps[1]
    a_np[:3, 1] = np.array(iop[3:]) * ps[0]
    a_np[:3, 2] = step
    a_np[:3, 3] = ipps[0]
    a_np = np.diag([-1, -1, 1, 1]) @ a_np
    # nibabel's multi-frame wrapper, when it copes with this file.
    a_nib = None
    try:
        w = dicomwrappers.wrapper_from_file(path)
        a = np.array(w.affine)
        a[:, [0, 1]] = a[:, [1, 0]]
        # nibabel takes the position of the first frame in the file and
        # SliceThickness along the normal (it expects sorted frames), so
        # only its first two columns are compared; the slice step and the
        # origin come from the frames sorted along n.
        a[:3, 2] = step
        a[:3, 3] = ipps[0]
        a_nib = (np.diag([-1, -1, 1, 1]) @ a).tolist()
        assert np.allclose(a_nib, a_np, atol=1e-9)
    except Exception as e:  # noqa: BLE001
        a_nib = None
        print("nibabel multiframe wrapper:", type(e).__name__, e)
    # pixel values as pydicom decodes them, scaled per frame
    back = pydicom.dcmread(path)
    arr = back.pixel_array.astype(float)
    data = np.zeros_like(expect)
    for f, (t, k) in enumerate(frames):
        pv = back.PerFrameFunctionalGroupsSequence[f].PixelValueTransformationSequence[0]
        data[t, k] = float(pv.RescaleSlope) * arr[f] + float(pv.RescaleIntercept)
    assert np.allclose(data, expect)
    truth = [t2_truth(i, j, k)["T2"] for k in range(nz) for j in range(rows) for i in range(cols)]
    return dict(uid=spec["uid"], number=spec["number"], description=spec["desc"],
                rows=rows, columns=cols, slices=nz, volumes=len(tes), files=1,
                affine_nibabel=a_nib, affine_numpy=a_np.tolist(),
                data=[round(float(v), 6) for v in data.reshape(-1)], truth=dict(T2=truth),
                frame_order=[[t, k] for t, k in frames], paths=[os.path.relpath(path, ROOT)])


def compressed():
    spec = series_spec(90, "compressed jpeg", dir="compressed")
    ds = base_dataset(MR, JPEGBaseline8Bit, spec)
    ds.ImageType = ["ORIGINAL", "PRIMARY", "M", "ND"]
    ds.ImagePositionPatient = ["0", "0", "0"]
    ds.ImageOrientationPatient = ["1", "0", "0", "0", "1", "0"]
    ds.PixelSpacing = ["1", "1"]
    ds.EchoTime = "10"
    ds.Rows, ds.Columns = 12, 16
    ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 8, 8, 7, 0
    ds.PixelData = encapsulate([b"\xff\xd8\xff\xe0 not really a JPEG \xff\xd9"])
    ds["PixelData"].is_undefined_length = True
    ds.is_implicit_VR = False
    os.makedirs(os.path.join(ROOT, "compressed"), exist_ok=True)
    path = os.path.join(ROOT, "compressed", rand_name())
    ds.save_as(path, write_like_original=False)
    return dict(uid=spec["uid"], number=90, paths=[os.path.relpath(path, ROOT)],
                transfer_syntax=str(JPEGBaseline8Bit))


def main():
    global STUDY, FOR
    if os.path.isdir(ROOT):
        shutil.rmtree(ROOT)
    os.makedirs(ROOT)
    STUDY, FOR = new_uid(), new_uid()
    refs = dict(source="pydicom %s / nibabel %s / numpy %s, script testdata/gen/dicom_refs.py"
                % (pydicom.__version__, nibabel.__version__, np.__version__), series={})
    tes = [10.0, 20.0, 40.0, 80.0]
    refs["series"]["oblique_se"] = classic_series(series_spec(
        3, "T2 multi-echo oblique", dir="mix", depth=2, rows=12, cols=16, slices=4,
        angles=(20.0, 10.0, -15.0), spacing=[0.9, 1.2], ipp0=[-30.5, 20.25, 15.0],
        step=3.0, thickness=2.5, seq="SE", seqname="*se2d4",
        params=[dict(te=te, echo=e + 1, tr=2000.0, fa=90.0) for e, te in enumerate(tes)],
        truth=t2_truth, signal=se, slope=0.25, intercept=5.0, truth_keys=["T2", "M0"]))
    refs["series"]["gre_implicit"] = classic_series(series_spec(
        4, "T2star multi-echo gre", dir="mix", depth=1, rows=10, cols=12, slices=3,
        angles=(0.0, 0.0, 0.0), spacing=[1.5, 1.5], ipp0=[-9.0, -7.5, -20.0],
        step=4.0, thickness=4.0, seq="GR", seqname="*fl2d3", ts=ImplicitVRLittleEndian,
        params=[dict(te=te, echo=e + 1, tr=500.0, fa=30.0) for e, te in enumerate([3.0, 8.0, 13.0])],
        truth=t2s_truth, signal=gre, slope=1.0, intercept=100.0, signed=True, truth_keys=["T2star"]))
    refs["series"]["localizer"] = classic_series(series_spec(
        1, "localizer", dir="mix", depth=1, rows=12, cols=16, slices=3, image_type=["ORIGINAL", "PRIMARY", "LOCALIZER"],
        angles=(0.0, 90.0, 90.0), spacing=[2.0, 2.0], ipp0=[0.0, -16.0, 12.0], step=10.0, thickness=5.0,
        seq="GR", params=[dict(te=2.0)], truth=t2s_truth, signal=gre, slope=1.0, intercept=0.0))
    with open(os.path.join(ROOT, "mix", "notes.txt"), "w") as f:
        f.write("scan notes: not a DICOM file\n")
    with open(os.path.join(ROOT, "mix", rand_name()), "wb") as f:
        f.write(bytes(nrng.integers(0, 256, 300, dtype=np.uint8)))
    open(os.path.join(ROOT, "mix", "empty.dcm"), "wb").close()
    refs["mix_counts"] = dict(series=2, skipped=2, unreadable=1, ignored=3)

    refs["series"]["enhanced"] = enhanced(series_spec(
        5, "T2 enhanced multi-frame", dir="enhanced", rows=12, cols=16, slices=3,
        angles=(-25.0, 5.0, 30.0), spacing=[1.1, 0.8], ipp0=[12.0, -40.0, 33.3],
        step=2.5, thickness=2.0, tes=[12.0, 24.0, 36.0, 48.0]))

    refs["series"]["ir_deflate"] = classic_series(series_spec(
        6, "T1 inversion recovery", dir="ir", depth=1, rows=12, cols=16, slices=3,
        angles=(0.0, -90.0, 0.0), spacing=[1.0, 1.25], ipp0=[-10.0, 5.0, 40.0],
        step=5.0, thickness=5.0, seq="IR", ts=DeflatedExplicitVRLittleEndian,
        params=[dict(ti=ti, te=12.0, tr=10000.0, fa=90.0) for ti in [50.0, 200.0, 600.0, 2000.0]],
        truth=t1_truth, signal=ir, slope=0.5, intercept=0.0, truth_keys=["T1"]))

    refs["series"]["compressed"] = compressed()

    # Broken cases, each in its own folder.
    small = dict(rows=4, cols=5, angles=(0.0, 0.0, 0.0), spacing=[1.0, 1.0], ipp0=[0.0, 0.0, 0.0],
                 thickness=2.0, seq="SE", truth=t2_truth, signal=se, slope=1.0, intercept=0.0)
    tr = classic_series(series_spec(
        20, "broken truncated", dir="broken/truncated", slices=2, step=2.0,
        params=[dict(te=te, echo=e + 1) for e, te in enumerate([10.0, 20.0])], **small))
    cut = os.path.join(ROOT, tr["file_of"]["1,1"])
    size = os.path.getsize(cut)
    with open(cut, "r+b") as f:
        f.truncate(size - 13)
    refs["series"]["truncated"] = dict(uid=tr["uid"], number=20, truncated=tr["file_of"]["1,1"],
                                       size=size - 13)
    ms = classic_series(series_spec(
        21, "broken missing", dir="broken/missing", slices=3, step=2.0,
        params=[dict(te=te, echo=e + 1) for e, te in enumerate([10.0, 20.0, 30.0])], **small))
    os.remove(os.path.join(ROOT, ms["file_of"]["2,1"]))  # echo 3 (TE 30), slice 2 (z = 2 mm)
    refs["series"]["missing"] = dict(uid=ms["uid"], number=21, slice=2, slices=3, te=30.0, position=2.0)
    mx = classic_series(series_spec(
        22, "broken matrix", dir="broken/matrix", slices=2, step=2.0,
        params=[dict(te=te, echo=e + 1) for e, te in enumerate([10.0, 20.0])],
        matrix_override={(1, 0): (6, 5)}, **small))
    refs["series"]["matrix"] = dict(uid=mx["uid"], number=22, odd=mx["file_of"]["1,0"])
    un = classic_series(series_spec(
        23, "broken uneven", dir="broken/uneven", slices=3, step=3.0, offsets=[0.0, 3.0, 7.0],
        params=[dict(te=10.0)], **small))
    refs["series"]["uneven"] = dict(uid=un["uid"], number=23, worst=0.5, step=3.5)

    with open(os.path.join(ROOT, "refs.json"), "w") as f:
        json.dump(refs, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
