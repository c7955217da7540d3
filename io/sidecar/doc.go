// Package sidecar reads the JSON sidecar that accompanies a NIfTI image in
// the BIDS layout (x.json beside x.nii or x.nii.gz) and turns its sequence
// parameters into per-volume volume.Acquisition values.
//
// BIDS gives times in seconds and angles in degrees (BIDS metadata:
// EchoTime, InversionTime, RepetitionTime, RepetitionTimeExcitation in
// seconds; FlipAngle in degrees; MagneticFieldStrength in tesla
// [check-values §3.6]). Read converts times to milliseconds, the unit used
// everywhere inside tauvox. A parameter may be a number (the same for every
// volume) or a list with one value per volume; a missing one is NaN.
//
// Values that cannot be right are refused rather than guessed at: NaN or
// negative numbers, flip angles outside (0, 360], and times so long that
// they were almost certainly written in milliseconds by mistake (an
// EchoTime above 10 s, say). Every error is one line naming the file and
// the key: "scan.json: EchoTime: expected a number or a list of numbers".
//
// ParseList reads the command-line form of such lists ("10,20,30" or
// "10:10:320") for images that come without a sidecar.
package sidecar
