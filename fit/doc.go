// Package fit holds the signal models of tauvox, their solvers, and the
// voxel-parallel engine that turns a 4-D series into parameter maps.
//
// A Model describes one signal equation with one estimation method (for
// example MonoExp with LogLinear or NLLS). For a given protocol (the
// acquisition parameters of each volume) a Model makes Fitters: per-worker
// workspaces that fit one voxel at a time into a caller-owned Result.
// A Fitter is not safe for concurrent use; the engine creates one per
// worker. Fitting a voxel allocates nothing.
//
// Every voxel yields its output values, their standard errors (from the
// Jacobian and the residual variance at the solution,
//
//	cov(θ̂) = s²·(JᵀJ)⁻¹,   s² = RSS/(n − p),
//
// common practice for nonlinear least squares, e.g. Bates & Watts 1988,
// ch. 2), the coefficient of determination R² = 1 − RSS/TSS in the signal
// domain, and a Status. Convergence failure is data, not an error: a failed
// voxel has NaN values and a non-OK Status, never a silent 0.
//
// Run fits a whole image. Each voxel's result depends only on that voxel's
// samples and the protocol, so the maps are bit-identical for any number of
// workers.
//
// Units: times in milliseconds, rates in 1/s, angles in degrees. The package
// knows no file formats.
package fit
