// Package series turns what a user points tauvox at into one volume.Image
// with its acquisition parameters: a NIfTI file with its BIDS sidecar, or
// a NIfTI file plus parameter lists given on the command line. It also
// writes series (NIfTI plus sidecar), as the simulator does, and derives
// sub-series (dropping the first echoes).
package series
