// Package volume defines the one in-memory image type that every part of
// tauvox shares: a 3-D or 4-D grid of float32 samples, its voxel-to-world
// affine in scanner coordinates (RAS, millimetres, voxel centres, as in the
// NIfTI qform/sform), the acquisition parameters of each volume, and a short
// description of where the data came from.
//
// Conventions
//
//   - Samples are stored with i (x) varying fastest, then j, k, and the volume
//     index t slowest: index = i + Nx*(j + Ny*(k + Nz*t)). This is the NIfTI
//     on-disk order, so readers and writers copy without reordering.
//   - Times are in milliseconds and angles in degrees inside tauvox. Readers
//     convert at the file boundary (BIDS sidecars store seconds).
//   - A parameter that is not known is NaN, never 0.
//
// The package holds no file formats; io/nifti, io/dicom and friends convert
// between files and Image.
package volume
