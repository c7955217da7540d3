#!/usr/bin/python3
"""Generate exports in which one protocol is split over several series, and
series whose geometry tests the stacking tolerances.

Writer: pydicom 2.3.1 (Debian python3-pydicom), numpy 1.24; reference affine:
nibabel 5.0.0 (nibabel.nicom.dicomwrappers). Everything is invented test data
(a synthetic relaxation phantom); no patient data. Run from the repository
root:

    /usr/bin/python3 testdata/gen/dicom_protocols.py

It rewrites testdata/dicom/protocols/ and testdata/dicom/geometry/ (files and
refs.json). Deterministic (seeded).

protocols/   one study, one frame of reference:
             inversion recovery as 7 series (one per TI), variable flip angle
             as 6 series (one per flip angle) on the same grid, a localizer,
             an unrelated T2-weighted series of another matrix, and a
             second unrelated pair (`mismatch/`) of 8x8 and 6x8 matrix to
             join by hand.
geometry/rounded/   20 oblique slices, 2 echoes, positions written with one
                    decimal (0.1 mm), as some exports do;
geometry/missing/   the same with slice 13 left out (both echoes);
geometry/dup-same/  3 slices x 2 echoes plus an exact copy of one file;
geometry/dup-diff/  the same, the copy with one pixel changed;
geometry/repeat-ti/ inversion recovery as 3 series where two share TI 300 ms;
geometry/echo-split/ multi-echo spin echo as 4 series, one per echo time.
"""

import json
import math
import os
import random
import shutil
import uuid
import warnings

import numpy as np
import pydicom
from pydicom.dataset import FileDataset, FileMetaDataset
from pydicom.uid import ExplicitVRLittleEndian

warnings.simplefilter("ignore")  # nibabel's "DICOM readers are experimental"
from nibabel.nicom import dicomwrappers  # noqa: E402

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.join(HERE, "..", "dicom")
MR = "1.2.840.10008.5.1.4.1.1.4"
rng = random.Random(20261203)


def new_uid():
    # PS3.5 B.2: UUID-derived UID under the 2.25 root.
    return "2.25." + str(uuid.UUID(int=rng.getrandbits(128)).int)


def rotation(az, el, roll):
    a, b, c = np.radians([az, el, roll])
    rz = np.array([[np.cos(a), -np.sin(a), 0], [np.sin(a), np.cos(a), 0], [0, 0, 1]])
    rx = np.array([[1, 0, 0], [0, np.cos(b), -np.sin(b)], [0, np.sin(b), np.cos(b)]])
    ry = np.array([[np.cos(c), 0, np.sin(c)], [0, 1, 0], [-np.sin(c), 0, np.cos(c)]])
    return rz @ rx @ ry


def ds_str(v, fmt="%.10g"):
    s = fmt % v
    if s == "-0" or s == "-0.0":
        s = s[1:]
    return s


STUDY = new_uid()
FOR = new_uid()


def write_series(folder, number, desc, volumes, geom, image_type=None, signal=None,
                 slope=0.05, skip=(), frame_of_ref=None, ipp_fmt="%.10g"):
    """Write one classic MR series: len(volumes) volumes x geom slices.

    volumes: list of dicts with te, tr, fa and optionally ti.
    signal(p, i, j, k) -> value. Returns the list of written files."""
    uid = new_uid()
    rot = rotation(*geom["angles"])
    x, y = rot[:, 0], rot[:, 1]
    n = np.cross(x, y)
    rows, cols, nz = geom["rows"], geom["cols"], geom["slices"]
    files = []
    os.makedirs(folder, exist_ok=True)
    inst = 0
    for t, p in enumerate(volumes):
        for k in range(nz):
            if k in skip:
                continue
            inst += 1
            ipp = np.array(geom["ipp0"]) + k * geom["step"] * n
            meta = FileMetaDataset()
            meta.MediaStorageSOPClassUID = MR
            sop = new_uid()
            meta.MediaStorageSOPInstanceUID = sop
            meta.TransferSyntaxUID = ExplicitVRLittleEndian
            meta.ImplementationClassUID = "2.25.1234567890123456789"
            ds = FileDataset(None, {}, file_meta=meta, preamble=b"\0" * 128)
            ds.is_little_endian, ds.is_implicit_VR = True, False
            ds.SOPClassUID, ds.SOPInstanceUID = MR, sop
            ds.StudyInstanceUID, ds.SeriesInstanceUID = STUDY, uid
            ds.FrameOfReferenceUID = frame_of_ref or FOR
            ds.Modality = "MR"
            ds.Manufacturer = "Invented Instruments"
            ds.StationName = "BENCH-9"
            ds.MagneticFieldStrength = "3"
            ds.PatientName, ds.PatientID = "Phantom^Protocol", "PHANTOM-016"
            ds.StudyDate = ds.SeriesDate = ds.AcquisitionDate = "20261203"
            ds.StudyTime = "080000"
            ds.SeriesTime = ds.AcquisitionTime = "08%02d00" % number
            ds.SeriesNumber = str(number)
            ds.SeriesDescription = desc
            ds.InstanceNumber = str(inst)
            ds.ImageType = image_type or ["ORIGINAL", "PRIMARY", "M", "ND"]
            ds.ScanningSequence = p.get("seq", "GR")
            ds.SequenceVariant = "SP"
            ds.ImagePositionPatient = [ds_str(v, ipp_fmt) for v in ipp]
            ds.ImageOrientationPatient = [ds_str(v) for v in list(x) + list(y)]
            ds.PixelSpacing = [ds_str(v) for v in geom["spacing"]]
            ds.SliceThickness = ds_str(geom["step"])
            ds.SpacingBetweenSlices = ds_str(geom["step"])
            ds.EchoTime = ds_str(p["te"])
            ds.RepetitionTime = ds_str(p["tr"])
            ds.FlipAngle = ds_str(p["fa"])
            if "ti" in p:
                ds.InversionTime = ds_str(p["ti"])
            ds.EchoNumbers = str(p.get("echo", 1))
            ds.RescaleSlope, ds.RescaleIntercept, ds.RescaleType = ds_str(slope), "0", "US"
            val = np.zeros((rows, cols))
            for j in range(rows):
                for i in range(cols):
                    val[j, i] = signal(p, i, j, k) if signal else 100 + i + 10 * j + 100 * k + 7 * t
            stored = np.clip(np.round(val / slope), 0, 65535)
            ds.Rows, ds.Columns = rows, cols
            ds.SamplesPerPixel, ds.PhotometricInterpretation = 1, "MONOCHROME2"
            ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 16, 16, 15, 0
            ds.PixelData = stored.astype("<u2").tobytes()
            path = os.path.join(folder, "%016x" % rng.getrandbits(64))
            ds.save_as(path, write_like_original=False)
            files.append(dict(path=path, t=t, k=k, ipp=[float(v) for v in ds.ImagePositionPatient]))
    return files


def nib_affine(files, geom):
    """The RAS affine of tauvox's axes (i = column, j = row, k along X x Y)
    from nibabel's wrapper of one file. nibabel's axes are (row, column,
    slice) with the slice axis along Y x X = -(X x Y) (dicomwrappers
    slice_normal), so its wrapper of the slice highest along X x Y is the
    first along its own slice axis; k = nz-1-k'."""
    rot = rotation(*geom["angles"])
    n = np.cross(rot[:, 0], rot[:, 1])
    top = max((f for f in files if f["t"] == 0), key=lambda f: float(np.dot(n, f["ipp"])))
    w = dicomwrappers.wrapper_from_file(top["path"])
    a = np.array(w.affine)                 # LPS, (row, col, slice')
    nz = geom["slices"]
    m = np.array([[0, 1, 0, 0],            # row   = j
                  [1, 0, 0, 0],            # col   = i
                  [0, 0, -1, nz - 1],      # slice' = nz-1-k
                  [0, 0, 0, 1]], float)
    return (np.diag([-1, -1, 1, 1]) @ a @ m).tolist()


def enhanced_rwv(folder):
    """One Enhanced MR file, 2 echoes x 2 slices of 4x4, whose frames carry
    both a Pixel Value Transformation (rescale) and a Real World Value
    Mapping item (PS3.3 C.7.6.16.2.11) with its own slope and intercept per
    frame. Returns the expected real-world samples per (echo, slice)."""
    from pydicom.dataset import Dataset
    from pydicom.sequence import Sequence
    geom = dict(angles=(0, 0, 0), rows=4, cols=4, slices=2, step=3.0, spacing=[1.0, 1.0], ipp0=[0.0, 0.0, 0.0])
    meta = FileMetaDataset()
    meta.MediaStorageSOPClassUID = "1.2.840.10008.5.1.4.1.1.4.1"
    sop = new_uid()
    meta.MediaStorageSOPInstanceUID = sop
    meta.TransferSyntaxUID = ExplicitVRLittleEndian
    meta.ImplementationClassUID = "2.25.1234567890123456789"
    ds = FileDataset(None, {}, file_meta=meta, preamble=b"\0" * 128)
    ds.is_little_endian, ds.is_implicit_VR = True, False
    ds.SOPClassUID, ds.SOPInstanceUID = meta.MediaStorageSOPClassUID, sop
    ds.StudyInstanceUID, ds.SeriesInstanceUID, ds.FrameOfReferenceUID = STUDY, new_uid(), FOR
    ds.Modality, ds.SeriesNumber, ds.SeriesDescription = "MR", "61", "rwv_enhanced"
    ds.ImageType = ["ORIGINAL", "PRIMARY", "M", "NONE"]
    ds.NumberOfFrames = "4"
    ds.EchoPulseSequence = "SPIN"
    shared = Dataset()
    pm = Dataset()
    pm.PixelSpacing = ["1", "1"]
    pm.SliceThickness = "3"
    shared.PixelMeasuresSequence = Sequence([pm])
    po = Dataset()
    po.ImageOrientationPatient = ["1", "0", "0", "0", "1", "0"]
    shared.PlaneOrientationSequence = Sequence([po])
    tm = Dataset()
    tm.RepetitionTime, tm.FlipAngle = 2000.0, 90.0
    shared.MRTimingAndRelatedParametersSequence = Sequence([tm])
    ds.SharedFunctionalGroupsSequence = Sequence([shared])
    per, pix, expect = [], [], {}
    tes = [15, 45]
    for f, (t, k) in enumerate([(1, 0), (0, 1), (1, 1), (0, 0)]):   # frames out of order
        g = Dataset()
        pp = Dataset()
        pp.ImagePositionPatient = ["0", "0", ds_str(3.0 * k)]
        g.PlanePositionSequence = Sequence([pp])
        me = Dataset()
        me.EffectiveEchoTime = float(tes[t])
        g.MREchoSequence = Sequence([me])
        pv = Dataset()
        pv.RescaleSlope, pv.RescaleIntercept, pv.RescaleType = ds_str(0.02 * (1 + t)), "-3.5", "US"
        g.PixelValueTransformationSequence = Sequence([pv])
        rw = Dataset()
        rs, ri = 0.25 * (1 + f), 2.0 * f
        rw.RealWorldValueSlope, rw.RealWorldValueIntercept = rs, ri
        rw.LUTLabel, rw.LUTExplanation = "T2W", "invented units"
        rw.RealWorldValueFirstValueMapped, rw.RealWorldValueLastValueMapped = 0, 4095
        cd = Dataset()
        cd.CodeValue, cd.CodingSchemeDesignator, cd.CodeMeaning = "1", "UCUM", "no units"
        rw.MeasurementUnitsCodeSequence = Sequence([cd])
        g.RealWorldValueMappingSequence = Sequence([rw])
        per.append(g)
        stored = np.array([[100 + 10 * f + i + 4 * j for i in range(4)] for j in range(4)], dtype="<u2")
        pix.append(stored.tobytes())
        expect["%d,%d" % (t, k)] = (rs * stored.astype(float) + ri).flatten().tolist()
    ds.PerFrameFunctionalGroupsSequence = Sequence(per)
    ds.Rows, ds.Columns = 4, 4
    ds.SamplesPerPixel, ds.PhotometricInterpretation = 1, "MONOCHROME2"
    ds.BitsAllocated, ds.BitsStored, ds.HighBit, ds.PixelRepresentation = 16, 16, 15, 0
    ds.PixelData = b"".join(pix)
    os.makedirs(folder, exist_ok=True)
    ds.save_as(os.path.join(folder, "enhanced.dcm"), write_like_original=False)
    return expect


def main():
    for d in ("protocols", "geometry"):
        shutil.rmtree(os.path.join(ROOT, d), ignore_errors=True)
    refs = {"source": "testdata/gen/dicom_protocols.py (pydicom %s, nibabel dicomwrappers)" % pydicom.__version__}

    geom = dict(angles=(10, 20, 5), rows=8, cols=8, slices=3, step=4.0,
                spacing=[1.5, 1.25], ipp0=[-20.0, -30.0, 15.0])
    nx, ny, nz = geom["cols"], geom["rows"], geom["slices"]

    def t1_of(i, j, k):  # ms: 300 ... ~2000 over the voxels (invented)
        return 300.0 + 1700.0 * (i + nx * (j + ny * k)) / (nx * ny * nz - 1)

    def m0_of(i, j, k):
        return 800.0 + 20.0 * k

    def ir_signal(p, i, j, k):
        # Magnitude inversion recovery with ideal inversion and long TR
        # (Barral et al. 2010 form with b = -2a).
        return abs(m0_of(i, j, k) * (1 - 2 * math.exp(-p["ti"] / t1_of(i, j, k))))

    def vfa_signal(p, i, j, k):
        # Spoiled gradient echo (Ernst equation; Fram et al. 1987).
        e1 = math.exp(-p["tr"] / t1_of(i, j, k))
        a = math.radians(p["fa"])
        return m0_of(i, j, k) * math.sin(a) * (1 - e1) / (1 - e1 * math.cos(a)) * 10

    out = os.path.join(ROOT, "protocols")
    tis = [50, 150, 300, 600, 1000, 1800, 3000]
    ir_files = []
    for s, ti in enumerate(tis):
        ir_files += write_series(out, 3 + s, "ir_ti%d" % ti, [dict(ti=ti, tr=6000, te=12, fa=90, seq="IR")], geom, signal=ir_signal)
    fas = [2, 4, 8, 12, 16, 20]
    vfa_files = []
    for s, fa in enumerate(fas):
        vfa_files += write_series(out, 11 + s, "vfa_fa%d" % fa, [dict(fa=fa, tr=15, te=3)], geom, signal=vfa_signal)
    loc = dict(angles=(0, 90, 0), rows=8, cols=8, slices=1, step=5.0, spacing=[4, 4], ipp0=[-16, 0, -16])
    write_series(out, 1, "localizer", [dict(te=2, tr=8, fa=20)], loc, image_type=["ORIGINAL", "PRIMARY", "LOCALIZER"])
    other = dict(angles=(0, 0, 0), rows=6, cols=8, slices=3, step=5.0, spacing=[2, 2], ipp0=[-8, -6, 0])
    write_series(out, 2, "t2w_axial", [dict(te=90, tr=4000, fa=90, seq="SE")], other)
    refs["protocols"] = dict(
        ir=dict(series=["ir_ti%d" % v for v in tis], ti=tis, tr=6000, affine=nib_affine(ir_files, geom)),
        vfa=dict(series=["vfa_fa%d" % v for v in fas], fa=fas, tr=15, affine=nib_affine(vfa_files, geom)),
        t1=[[[t1_of(i, j, k) for i in range(nx)] for j in range(ny)] for k in range(nz)],
        dims=[nx, ny, nz])

    # Two series of different matrix to join by hand (--series).
    mm = os.path.join(ROOT, "protocols-mismatch")
    shutil.rmtree(mm, ignore_errors=True)
    g8 = dict(geom, slices=2)
    write_series(mm, 21, "ir_ti100", [dict(ti=100, tr=6000, te=12, fa=90, seq="IR")], g8)
    write_series(mm, 22, "ir_ti900", [dict(ti=900, tr=6000, te=12, fa=90, seq="IR")], dict(g8, rows=6))
    write_series(mm, 23, "ir_ti400_tr5000", [dict(ti=400, tr=5000, te=12, fa=90, seq="IR")], g8)

    # Geometry: positions rounded to 0.1 mm (oblique, 20 slices of 3.3 mm).
    g20 = dict(angles=(25, 35, 10), rows=4, cols=4, slices=20, step=3.3, spacing=[2, 2], ipp0=[-40.0, 12.0, -25.0])
    echoes = [dict(te=10, tr=2000, fa=90, seq="SE", echo=1), dict(te=20, tr=2000, fa=90, seq="SE", echo=2)]
    rounded = write_series(os.path.join(ROOT, "geometry", "rounded"), 31, "rounded", echoes, g20, ipp_fmt="%.1f")
    # The largest deviation of a rounded position from the even step
    # through the first and last slice (numpy, in mm).
    rot = rotation(*g20["angles"])
    ipps = np.array([f["ipp"] for f in sorted(rounded, key=lambda f: f["k"]) if f["t"] == 0])
    d = (ipps[-1] - ipps[0]) / (len(ipps) - 1)
    dev = max(np.linalg.norm(ipps[k] - ipps[0] - k * d) for k in range(len(ipps)))
    refs["rounded"] = dict(max_deviation_mm=float(dev), affine=nib_affine(rounded, g20))
    write_series(os.path.join(ROOT, "geometry", "missing"), 32, "missing", echoes, g20, ipp_fmt="%.1f", skip={12})
    g3 = dict(g20, slices=3)
    for name, change in (("dup-same", False), ("dup-diff", True)):
        folder = os.path.join(ROOT, "geometry", name)
        files = write_series(folder, 33, name, echoes, g3)
        src = files[1]["path"]
        ds = pydicom.dcmread(src)
        if change:
            px = bytearray(ds.PixelData)
            px[0] ^= 0x01
            ds.PixelData = bytes(px)
        ds.save_as(os.path.join(folder, "copy-of-" + os.path.basename(src)), write_like_original=False)
        refs[name] = dict(copied=os.path.basename(src))
    rep = os.path.join(ROOT, "geometry", "repeat-ti")
    for s, ti in enumerate([100, 300, 300]):
        write_series(rep, 41 + s, "ir_rep%d" % s, [dict(ti=ti, tr=6000, te=12, fa=90, seq="IR")], dict(geom, slices=2))

    # Multi-echo spin echo as one series per echo time (added last, so the
    # files above keep their bytes).
    es = os.path.join(ROOT, "geometry", "echo-split")
    for s, te in enumerate([10, 20, 40, 80]):
        write_series(es, 51 + s, "se_te%d" % te, [dict(te=te, tr=3000, fa=90, seq="SE")], dict(geom, slices=2))

    refs["rwv_enhanced"] = enhanced_rwv(os.path.join(ROOT, "geometry", "rwv-enhanced"))

    with open(os.path.join(ROOT, "protocols-refs.json"), "w") as f:
        json.dump(refs, f, indent=1)
        f.write("\n")


main()
