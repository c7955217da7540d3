package fit

// Method names an estimation method.
type Method string

// Estimation methods. Not every model offers every method.
const (
	LogLinear Method = "loglinear" // weighted linear fit of ln S
	NLLS      Method = "nlls"      // nonlinear least squares (Levenberg–Marquardt)
	Linear    Method = "linear"    // closed-form linearisation (DESPOT1 for VFA)
	RDNLS     Method = "rdnls"     // reduced-dimension search + polish (IR)
	ARLO      Method = "arlo"      // auto-regression on linear operations (Pei et al. 2015)
	// Dictionary stops at the best dictionary entry, no polish (t2-epg).
	Dictionary Method = "dictionary"
	// NNLS is non-negative least squares on a fixed basis (t2-spectrum).
	NNLS Method = "nnls"
	// Ratio is the closed-form flip angle from the ratio of two signals
	// (b1-dam, b1-afi).
	Ratio Method = "ratio"
)

// Solver selects the numerical engine of a nonlinear method.
type Solver int

const (
	// Dedicated is tauvox's own allocation-free Levenberg–Marquardt solver
	// (the default).
	Dedicated Solver = iota
	// Gonum minimises the same cost with gonum's optimize package (BFGS on
	// scaled parameters). It is slower and allocates per voxel; it is kept
	// as an independent cross-check.
	Gonum
)
