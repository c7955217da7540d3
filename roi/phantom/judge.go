package phantom

import (
	"fmt"
	"math"

	"github.com/tauvox/tauvox/roi/qa"
)

// The qa.json types live in package roi/qa (so that roi/history reads
// them without the simulator's solvers); these names keep them here too.
type (
	QA            = qa.QA
	Tool          = qa.Tool
	Session       = qa.Session
	SeriesRef     = qa.SeriesRef
	Protocol      = qa.Protocol
	FileRef       = qa.FileRef
	Localisation  = qa.Localisation
	VialQA        = qa.VialQA
	Identity      = qa.Identity
	IdentityGroup = qa.IdentityGroup
	Choice        = qa.Choice
	Evidence      = qa.Evidence
)

// QAFormat and the verdicts, as in package roi/qa.
const (
	QAFormat     = qa.QAFormat
	Pass         = qa.Pass
	Fail         = qa.Fail
	NotMeasured  = qa.NotMeasured
	Undetermined = qa.Undetermined

	IdentityFound        = qa.IdentityFound
	IdentityGiven        = qa.IdentityGiven
	IdentityUndetermined = qa.IdentityUndetermined
)

// Judge fills the reference, deviation, tolerance and verdict of r from
// the definition's vial v at the session's field and temperature. The
// measured value compared is the median (robust to a few edge voxels,
// common practice in phantom QA [check-values §4.2: report mean, median
// and SD]). A vial passes when |median − reference| ≤ max(pct % of
// reference, abs_ms) (the tolerance convention of the phantom definition,
// design.md; common practice). A vial without a reference row at the
// session's field, without a tolerance for the quantity, or without a
// usable measurement (fewer than minN finite voxels) is not measured.
func Judge(r *VialQA, v *Vial, tol map[string]Tolerance, field, temp float64, extrapolate bool, minN int) error {
	r.Verdict = NotMeasured
	ref, unc, ok, err := v.ReferenceAt(r.Quantity, field, temp, extrapolate)
	if err != nil {
		return err
	}
	if !ok {
		r.Note = fmt.Sprintf("no %s reference at %g T", r.Quantity, field)
		return nil
	}
	r.Reference, r.RefUncPct = ref, unc
	t, ok := tol[r.Quantity]
	if !ok {
		r.Note = "no tolerance for " + r.Quantity
		return nil
	}
	r.Tolerance = math.Max(t.Pct/100*ref, t.Abs)
	if r.N < minN || math.IsNaN(r.Median) {
		if r.Note == "" {
			r.Note = fmt.Sprintf("%d usable voxels", r.N)
		}
		return nil
	}
	r.Deviation = 100 * (r.Median - ref) / ref
	if math.Abs(r.Median-ref) <= r.Tolerance {
		r.Verdict = Pass
	} else {
		r.Verdict = Fail
	}
	return nil
}

// Overall returns the session verdict: fail when any vial fails,
// undetermined when none failed but some vial's identity is undetermined,
// pass when at least one passed and none failed or is undetermined,
// not-measured otherwise.
func Overall(vials []VialQA) string {
	v := NotMeasured
	und := false
	for _, r := range vials {
		switch r.Verdict {
		case Fail:
			return Fail
		case Pass:
			v = Pass
		case Undetermined:
			und = true
		}
	}
	if und {
		return Undetermined
	}
	return v
}
