package volume

import "math"

// Affine is a 4×4 homogeneous transform from voxel indices to world
// coordinates (RAS, mm). The last row is [0 0 0 1] for every affine tauvox
// makes.
type Affine [4][4]float64

// Identity returns the identity affine (1 mm isotropic voxels at the
// origin).
func Identity() Affine {
	return Affine{{1, 0, 0, 0}, {0, 1, 0, 0}, {0, 0, 1, 0}, {0, 0, 0, 1}}
}

// Apply maps a voxel position (i, j, k) to world coordinates.
func (a *Affine) Apply(i, j, k float64) (x, y, z float64) {
	x = a[0][0]*i + a[0][1]*j + a[0][2]*k + a[0][3]
	y = a[1][0]*i + a[1][1]*j + a[1][2]*k + a[1][3]
	z = a[2][0]*i + a[2][1]*j + a[2][2]*k + a[2][3]
	return x, y, z
}

// VoxelSize returns the length of each of the three voxel axes in mm (the
// norms of the first three columns).
func (a *Affine) VoxelSize() [3]float64 {
	var s [3]float64
	for c := 0; c < 3; c++ {
		s[c] = math.Sqrt(a[0][c]*a[0][c] + a[1][c]*a[1][c] + a[2][c]*a[2][c])
	}
	return s
}

// Mul returns the product a·b.
func (a *Affine) Mul(b *Affine) Affine {
	var m Affine
	for r := 0; r < 4; r++ {
		for c := 0; c < 4; c++ {
			var s float64
			for k := 0; k < 4; k++ {
				s += a[r][k] * b[k][c]
			}
			m[r][c] = s
		}
	}
	return m
}

// Inverse returns the inverse of an affine whose last row is [0 0 0 1],
// and false when its 3×3 part is singular.
func (a *Affine) Inverse() (Affine, bool) {
	m00, m01, m02 := a[0][0], a[0][1], a[0][2]
	m10, m11, m12 := a[1][0], a[1][1], a[1][2]
	m20, m21, m22 := a[2][0], a[2][1], a[2][2]
	c00 := m11*m22 - m12*m21
	c01 := m12*m20 - m10*m22
	c02 := m10*m21 - m11*m20
	det := m00*c00 + m01*c01 + m02*c02
	if det == 0 || math.IsNaN(det) || math.IsInf(det, 0) {
		return Affine{}, false
	}
	inv := 1 / det
	var r Affine
	r[0][0] = c00 * inv
	r[0][1] = (m02*m21 - m01*m22) * inv
	r[0][2] = (m01*m12 - m02*m11) * inv
	r[1][0] = c01 * inv
	r[1][1] = (m00*m22 - m02*m20) * inv
	r[1][2] = (m02*m10 - m00*m12) * inv
	r[2][0] = c02 * inv
	r[2][1] = (m01*m20 - m00*m21) * inv
	r[2][2] = (m00*m11 - m01*m10) * inv
	for i := 0; i < 3; i++ {
		r[i][3] = -(r[i][0]*a[0][3] + r[i][1]*a[1][3] + r[i][2]*a[2][3])
	}
	r[3][3] = 1
	return r, true
}
