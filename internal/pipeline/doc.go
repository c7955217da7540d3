// Package pipeline is the one path from a series to written maps: it reads
// a series (DICOM folder or file, NIfTI file with its sidecar, or an image
// already loaded), applies the mask, B1 map and noise model, runs the fit
// engine of package fit, and writes the maps, their previews and
// provenance.json through a staged output folder. tauvox fit, batch and
// demo all call Run; nothing else calls the engine for them.
//
// Run decides by itself how to read: a NIfTI file is fitted a range of
// slices at a time within Config.Memory (bit-identical to a fit of the
// whole series); DICOM and pre-loaded series are fitted in memory. Every
// setting that shapes the maps, the model-specific ones included, is
// recorded in provenance.json by Settings, whichever way the series came.
//
// The package prints nothing: progress goes to the caller's Progress
// function, and errors name the file and the problem on one line.
package pipeline
