package nifti

import (
	"math"

	"github.com/tauvox/tauvox/volume"
)

// quaternToAffine builds the qform affine of nifti1.h method 2:
//
//	[x]   [R11 R12 R13] [       pixdim[1]·i]   [qoffset_x]
//	[y] = [R21 R22 R23] [       pixdim[2]·j] + [qoffset_y]
//	[z]   [R31 R32 R33] [qfac · pixdim[3]·k]   [qoffset_z]
//
// with a = sqrt(1 - b² - c² - d²) and
//
//	R = [a²+b²-c²-d²   2(bc-ad)       2(bd+ac)    ]
//	    [2(bc+ad)      a²+c²-b²-d²    2(cd-ab)    ]
//	    [2(bd-ac)      2(cd+ab)       a²+d²-c²-b² ]
//
// (nifti1.h, "METHOD 2"). When b²+c²+d² exceeds 1 by rounding, (b, c, d) is
// renormalised and a = 0, as the nifti1.h text prescribes for a 180° turn.
func quaternToAffine(q, off, spacing [3]float64, qfac float64) volume.Affine {
	b, c, d := q[0], q[1], q[2]
	a := 1 - (b*b + c*c + d*d)
	if a < 1e-7 { // nifti1_io.c threshold for "a is zero"
		s := 1 / math.Sqrt(b*b+c*c+d*d)
		b, c, d = b*s, c*s, d*s
		a = 0
	} else {
		a = math.Sqrt(a)
	}
	xd, yd, zd := spacing[0], spacing[1], spacing[2]
	if qfac < 0 {
		zd = -zd
	}
	return volume.Affine{
		{(a*a + b*b - c*c - d*d) * xd, 2 * (b*c - a*d) * yd, 2 * (b*d + a*c) * zd, off[0]},
		{2 * (b*c + a*d) * xd, (a*a + c*c - b*b - d*d) * yd, 2 * (c*d - a*b) * zd, off[1]},
		{2 * (b*d - a*c) * xd, 2 * (c*d + a*b) * yd, (a*a + d*d - c*c - b*b) * zd, off[2]},
		{0, 0, 0, 1},
	}
}

// affineToQuatern finds the qform parameters that best represent a general
// affine: the voxel sizes are the column norms, the rotation is the
// orthogonal matrix nearest (polar decomposition) to the column-normalised
// 3×3 part, and a negative determinant is absorbed by qfac = -1 with the
// third column negated (nifti1.h method 2; nifti1_io.c
// nifti_mat44_to_quatern follows the same steps). A zero column is
// replaced by a unit axis so that a degenerate affine still gives a valid
// rotation.
func affineToQuatern(m *volume.Affine) (q, off, spacing [3]float64, qfac float64) {
	var r [3][3]float64
	for c := 0; c < 3; c++ {
		n := math.Sqrt(m[0][c]*m[0][c] + m[1][c]*m[1][c] + m[2][c]*m[2][c])
		if n == 0 || math.IsNaN(n) || math.IsInf(n, 0) {
			for i := 0; i < 3; i++ {
				r[i][c] = 0
			}
			r[c][c] = 1
			n = 1
		} else {
			for i := 0; i < 3; i++ {
				r[i][c] = m[i][c] / n
			}
		}
		spacing[c] = n
	}
	off = [3]float64{m[0][3], m[1][3], m[2][3]}
	r = polar(r)
	qfac = 1
	if det3(&r) < 0 {
		qfac = -1
		for i := 0; i < 3; i++ {
			r[i][2] = -r[i][2]
		}
	}
	// Rotation matrix to unit quaternion, choosing the largest pivot for
	// accuracy (nifti1_io.c branches; standard, e.g. Shoemake 1985).
	var a, b, c, d float64
	if t := r[0][0] + r[1][1] + r[2][2] + 1; t > 0.5 {
		a = 0.5 * math.Sqrt(t)
		b = 0.25 * (r[2][1] - r[1][2]) / a
		c = 0.25 * (r[0][2] - r[2][0]) / a
		d = 0.25 * (r[1][0] - r[0][1]) / a
	} else {
		xd := 1 + r[0][0] - (r[1][1] + r[2][2])
		yd := 1 + r[1][1] - (r[0][0] + r[2][2])
		zd := 1 + r[2][2] - (r[0][0] + r[1][1])
		switch {
		case xd > 1:
			b = 0.5 * math.Sqrt(xd)
			c = 0.25 * (r[0][1] + r[1][0]) / b
			d = 0.25 * (r[0][2] + r[2][0]) / b
			a = 0.25 * (r[2][1] - r[1][2]) / b
		case yd > 1:
			c = 0.5 * math.Sqrt(yd)
			b = 0.25 * (r[0][1] + r[1][0]) / c
			d = 0.25 * (r[1][2] + r[2][1]) / c
			a = 0.25 * (r[0][2] - r[2][0]) / c
		default:
			d = 0.5 * math.Sqrt(zd)
			b = 0.25 * (r[0][2] + r[2][0]) / d
			c = 0.25 * (r[1][2] + r[2][1]) / d
			a = 0.25 * (r[1][0] - r[0][1]) / d
		}
		if a < 0 {
			b, c, d = -b, -c, -d
		}
	}
	return [3]float64{b, c, d}, off, spacing, qfac
}

func det3(r *[3][3]float64) float64 {
	return r[0][0]*(r[1][1]*r[2][2]-r[1][2]*r[2][1]) -
		r[0][1]*(r[1][0]*r[2][2]-r[1][2]*r[2][0]) +
		r[0][2]*(r[1][0]*r[2][1]-r[1][1]*r[2][0])
}

// polar returns the orthogonal factor Q of the polar decomposition M = Q·S,
// the orthogonal matrix nearest to M in the Frobenius norm, by the scaled
// Newton iteration X ← (γX + X⁻ᵀ/γ)/2 with γ = (‖X⁻¹‖/‖X‖)^½ (Higham,
// "Computing the polar decomposition — with applications", SIAM J Sci Stat
// Comput 1986;7(4):1160–1174 [from memory]). A singular M is returned
// unchanged after a small perturbation of its diagonal, as nifti1_io.c
// does.
func polar(m [3][3]float64) [3][3]float64 {
	x := m
	for iter := 0; iter < 100; iter++ {
		inv, ok := inv3(&x)
		if !ok {
			for i := 0; i < 3; i++ {
				x[i][i] += 1e-5
			}
			continue
		}
		nx, ni := frob(&x), frob(&inv)
		g := math.Sqrt(ni / nx)
		var next [3][3]float64
		var diff float64
		for i := 0; i < 3; i++ {
			for j := 0; j < 3; j++ {
				next[i][j] = 0.5 * (g*x[i][j] + inv[j][i]/g)
				diff += math.Abs(next[i][j] - x[i][j])
			}
		}
		x = next
		if diff < 1e-14 {
			break
		}
	}
	return x
}

func frob(x *[3][3]float64) float64 {
	var s float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			s += x[i][j] * x[i][j]
		}
	}
	return math.Sqrt(s)
}

func inv3(x *[3][3]float64) ([3][3]float64, bool) {
	a := volume.Affine{
		{x[0][0], x[0][1], x[0][2], 0},
		{x[1][0], x[1][1], x[1][2], 0},
		{x[2][0], x[2][1], x[2][2], 0},
		{0, 0, 0, 1},
	}
	b, ok := a.Inverse()
	var r [3][3]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			r[i][j] = b[i][j]
		}
	}
	return r, ok
}
