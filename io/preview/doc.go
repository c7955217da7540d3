// Package preview renders quantitative maps as PNG images for people to
// look at: one slice, a montage of every slice of a 3-D map with a
// labelled colour bar, and the colour tables they use.
//
// # Colour handling
//
// The colour maps recommended for relaxometry (Fuderer et al., Magn Reson
// Med 2025;93:490–506, check-values.md §5) are data that no package
// reachable here ships (check-values.md §7). tauvox therefore uses
// perceptually uniform tables shipped by matplotlib (Debian's
// python3-matplotlib 3.6.3), exported once by the committed script
// testdata/gen/colormaps.py into colormaps_gen.go, and keeps the
// recommended handling:
//
//   - an invalid value (NaN, ±Inf: failed fit, masked voxel) is drawn in
//     one reserved colour, black unless the caller chooses another; no
//     table used here has black as a valid colour;
//   - a valid value below the display minimum is drawn in the darkest
//     valid colour of the table, never in the invalid colour; a value
//     above the maximum in the brightest;
//   - rate maps (R1, R2, R2*) use the reversed table of their time map, so
//     a tissue looks alike in a T and an R display (ForQuantity);
//   - every montage carries a colour bar with its unit.
//
// The pairing of tables by quantity is tauvox's own "ember–lagoon" scheme
// (Scheme): the warm Plasma table for longitudinal relaxation (T1, R1) and
// the blue–green Viridis table for transverse relaxation (T2, T2*, R2,
// R2*); see ForQuantity.
//
// # Orientation
//
// Images are drawn in the voxel grid, without resampling or reorienting by
// the affine: image column x shows voxel index i increasing from left to
// right, and image row y (top to bottom) shows voxel index j decreasing,
// so j = ny−1 is the top row. For a grid whose j axis points anterior (as
// the NIfTI files tauvox writes from DICOM, and as NIfTI viewers show
// axial slices) anterior is up; whether the subject's right is on the left
// (radiological) or on the right (neurological) follows from the sign of
// the i axis in the affine: an i axis running towards the subject's left
// (as DICOM columns usually do) gives the radiological view.
//
// Rendering into a caller's image allocates nothing (Slice); functions
// that build whole pictures (Montage, ColorBar) allocate their result.
package preview
