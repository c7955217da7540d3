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
	// NoSignal: no finite sample differs from zero (an empty voxel, or a
	// series of zeros). Nothing can be estimated from it; fitting would only
	// return the solver's starting point.
	NoSignal Status = 5
	// BadB1: the voxel's B1 map value is not finite or outside
	// [MinB1, MaxB1], so a model that needs it has nothing to correct with.
	BadB1 Status = 6
)

// NumStatus is one more than the largest Status value.
const NumStatus = 7

var statusNames = [NumStatus]string{"ok", "masked", "too-few-points", "not-converged", "out-of-bounds", "no-signal", "bad-b1"}

// MinB1 and MaxB1 bound a usable relative transmit field (flip angle
// achieved / flip angle set). Measured B1 maps of the head and body at 1.5
// and 3 T lie well inside 0.3–2 (common practice); a value of 0 or below
// is no measurement at all (a masked or failed B1 voxel), and one beyond
// 2.5 is more likely a map in percent or in degrees than a real field.
const (
	MinB1 = 0.05
	MaxB1 = 2.5
)

// String returns the short name of the status, as used in provenance files.
func (s Status) String() string {
	if int(s) < len(statusNames) {
		return statusNames[s]
	}
	return "unknown"
}
