// Package roi selects regions of an image (spheres in scanner millimetres
// or voxel indices, label images) and computes statistics of a map inside
// them: n, mean, SD, median, IQR, min, max, CoV and the fraction of failed
// fits. Sub-package phantom holds phantom definitions and localisation.
package roi
