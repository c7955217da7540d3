// Package mapset writes the outputs of one fit into a folder: a NIfTI map
// per model output (BIDS suffixes such as T2map where one exists), its
// standard-error map (<map>_sd), the fit quality (R², fitquality), the
// status codes (status, uint8), a JSON sidecar beside every map, and
// provenance.json (inputs with SHA-256, settings, version, timings).
//
// The folder is built under a temporary name next to the target and
// renamed into place only when every file is complete, so a failed or
// interrupted run leaves nothing behind and an existing folder is replaced
// only with Force.
package mapset
