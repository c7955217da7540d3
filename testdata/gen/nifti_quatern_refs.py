#!/usr/bin/python3
"""Reference quaternions of voxel-to-world affines, made with nibabel, for
io/nifti TestQuaternionNibabel.

Run from the repository root:
    /usr/bin/python3 testdata/gen/nifti_quatern_refs.py > testdata/reference/nifti_quatern.json
Tested with Debian python3-nibabel 5.0.0 and python3-numpy 1.24.2.

Each case is an affine  A = [R . diag(zx, zy, qfac*zz) | offset]  with R a
rotation: seeded random rotations (uniform on SO(3): a normalised Gaussian
4-vector, Shoemake 1992, "Uniform random rotations", Graphics Gems III),
and turns of 90, 120, 135, 139, 140, 150, 160, 170, 175 and 179 degrees
(either sense) about each axis and about two oblique axes, each with
qfac +1 and -1. Turns beyond about 138.6 degrees (trace(R) < -0.5) take the
non-trace branches of the rotation-to-quaternion conversion (nifti1_io.c
nifti_mat44_to_quatern), where the sign of the quaternion's a matters.

For every case the JSON holds what nibabel computes:
  quat      nibabel.quaternions.mat2quat(R) -> (w, x, y, z), float64, made
            w >= 0 (the NIfTI convention a >= 0); its eigenvector method
            (Bar-Itzhack 2000) is independent of the branch method tauvox uses.
  header    Nifti1Header.set_qform(A, code=1) then the stored float32
            quatern_b/c/d, pixdim[0] (qfac), pixdim[1:4] and qoffset_x/y/z.
  qform     Nifti1Header.get_qform() of that header (from the float32 fields).
"""
import json
import sys

import nibabel as nib
import numpy as np
from nibabel.quaternions import mat2quat, quat2mat


def axis_rot(axis, deg):
    axis = np.asarray(axis, float)
    axis = axis / np.linalg.norm(axis)
    t = np.deg2rad(deg)
    w, v = np.cos(t / 2), np.sin(t / 2) * axis
    return quat2mat([w, *v])


def case(name, r, zooms, qfac, offset):
    a = np.eye(4)
    a[:3, :3] = r @ np.diag([zooms[0], zooms[1], qfac * zooms[2]])
    a[:3, 3] = offset
    q = mat2quat(r)
    if q[0] < 0:
        q = -q
    h = nib.Nifti1Header()
    h.set_qform(a, code=1)
    return {
        "name": name,
        "affine": a.tolist(),
        "quat": [float(v) for v in q],
        "header": {
            "quatern_bcd": [float(h["quatern_b"]), float(h["quatern_c"]), float(h["quatern_d"])],
            "qfac": float(h["pixdim"][0]),
            "pixdim": [float(v) for v in h["pixdim"][1:4]],
            "qoffset": [float(h["qoffset_x"]), float(h["qoffset_y"]), float(h["qoffset_z"])],
        },
        "qform": h.get_qform().tolist(),
    }


def main():
    rng = np.random.default_rng(20261203)
    cases = []
    axes = {"x": [1, 0, 0], "y": [0, 1, 0], "z": [0, 0, 1], "xy": [1, 1, 0], "oblique": [0.3, -0.5, 0.8]}
    for aname, ax in axes.items():
        for deg in (90, 120, 135, 139, 140, 150, 160, 170, 175, 179):
            for sense in (1, -1):
                for qfac in (1, -1):
                    zooms = rng.uniform(0.5, 4.0, 3)
                    off = rng.uniform(-120, 120, 3)
                    cases.append(case("%s %+d deg qfac %+d" % (aname, sense * deg, qfac),
                                      axis_rot(ax, sense * deg), zooms, qfac, off))
    for k in range(60):
        g = rng.normal(size=4)
        r = quat2mat(g / np.linalg.norm(g))
        qfac = 1 if k % 2 == 0 else -1
        cases.append(case("random %d qfac %+d" % (k, qfac), r, rng.uniform(0.5, 4.0, 3), qfac, rng.uniform(-120, 120, 3)))
    json.dump({
        "source": "nibabel %s (quaternions.mat2quat, Nifti1Header.set_qform/get_qform), numpy %s; script testdata/gen/nifti_quatern_refs.py"
                  % (nib.__version__, np.__version__),
        "cases": cases,
    }, sys.stdout, indent=None, separators=(",", ":"))
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
