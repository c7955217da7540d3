package fit

// Status is the outcome of fitting one voxel. It is stored as a byte in the
// status map; the numeric values are part of the output contract.
type Status uint8

const (
	// OK: the fit converged inside the parameter bounds.
	OK Status = 0
	// Masked: the voxel was outside the mask (user mask or threshold).
	Masked Status = 1
	// TooFewPoints: fewer valid samples than the model needs (non-finite
	// samples are dropped; log-linear fits also drop non-positive ones).
	TooFewPoints Status = 2
	// NotConverged: the solver stopped without meeting its convergence test
	// or the problem was degenerate (singular normal equations).
	NotConverged Status = 3
	// OutOfBounds: the estimate fell outside the model's plausible range.
	OutOfBounds Status = 4
)

// NumStatus is one more than the largest Status value.
const NumStatus = 5

var statusNames = [NumStatus]string{"ok", "masked", "too-few-points", "not-converged", "out-of-bounds"}

// String returns the short name of the status, as used in provenance files.
func (s Status) String() string {
	if int(s) < len(statusNames) {
		return statusNames[s]
	}
	return "unknown"
}
