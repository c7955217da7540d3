package dicom

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"sort"

	"github.com/tauvox/tauvox/volume"
)

// Tolerances of the stacking checks (common practice: scanners write
// positions with at least 0.01 mm resolution). Positions written with
// fewer decimals widen them to what the strings can carry (see
// roundingTol).
const (
	positionTol = 0.01 // mm: same slice; in-plane agreement of a slice across volumes
	spacingRel  = 0.01 // relative slice-step tolerance (1 %)
	spacingTol  = 0.01 // mm: absolute slice-step tolerance; the larger of the two applies
	pixelRel    = 1e-4 // relative PixelSpacing agreement
)

// layout is the grid of a series: which frame fills slice k of volume t.
type layout struct {
	nx, ny, nz, nt int
	cells          []*frameInfo // index k + nz*t
	affine         volume.Affine
	acq            []volume.Acquisition
	tol            float64 // mm: positions closer than this are one (grows with the rounding of the IPP strings)
}

// arrange sorts the frames of s into slices (by position along the slice
// normal n = X × Y, check-values §3.4) and volumes (by the varying
// parameter, ascending), checks that every slice has one image per volume
// and that the slices are evenly spaced, and builds the affine.
func arrange(s *Series) (*layout, error) {
	fail := func(path, format string, a ...any) (*layout, error) {
		if path == "" {
			path = s.Source.Path
		}
		return nil, &SeriesError{Path: path, Series: s.ID, Reason: fmt.Sprintf(format, a...), Err: ErrIncomplete}
	}
	f0 := s.frames[0]
	// Positions are as precise as the most decimals any of their strings
	// carries: a writer that rounds to 0.1 mm writes "12.3" and, with
	// trailing zeros dropped, "12". Strings without any decimals are
	// taken as exact (scanners write at least one decimal; common
	// practice), so quantum is half a unit of the last decimal written.
	dec := -1
	for _, fr := range s.frames {
		dec = max(dec, fr.ippDec)
	}
	quantum := 0.0
	if dec >= 1 {
		quantum = 0.5 * math.Pow(10, -float64(dec))
	}
	// roundingTol bounds how far apart two positions that agree before
	// rounding can be: each component is off by at most quantum, so a
	// point by at most √3·quantum, and a difference of two by twice that.
	roundingTol := 2 * math.Sqrt(3) * quantum
	sameTol := math.Max(positionTol, roundingTol)
	for _, fr := range s.frames {
		switch {
		case !fr.hasIOP:
			return fail(frameName(fr), "no ImageOrientationPatient (0020,0037)")
		case !fr.hasIPP:
			return fail(frameName(fr), "no ImagePositionPatient (0020,0032)")
		case !fr.hasPS:
			return fail(frameName(fr), "no PixelSpacing (0028,0030)")
		case fr.spacing[0] <= 0 || fr.spacing[1] <= 0:
			return fail(frameName(fr), "PixelSpacing %g\\%g is not positive", fr.spacing[0], fr.spacing[1])
		}
		for i := 0; i < 2; i++ {
			if math.Abs(fr.spacing[i]-f0.spacing[i]) > pixelRel*f0.spacing[i] {
				return fail(frameName(fr), "PixelSpacing %g\\%g differs from %g\\%g of %s",
					fr.spacing[0], fr.spacing[1], f0.spacing[0], f0.spacing[1], frameName(f0))
			}
		}
	}
	x := [3]float64{f0.iop[0], f0.iop[1], f0.iop[2]}
	y := [3]float64{f0.iop[3], f0.iop[4], f0.iop[5]}
	n := cross(x, y)
	nn := math.Sqrt(dot(n, n))
	if nn < 0.5 || math.Abs(dot(x, x)-1) > 0.01 || math.Abs(dot(y, y)-1) > 0.01 {
		return fail(frameName(f0), "ImageOrientationPatient %v is not a pair of unit vectors at right angles", f0.iop)
	}
	for i := range n {
		n[i] /= nn
	}

	// Volumes: distinct parameter keys, sorted by the varying parameter
	// and then the others.
	keys := map[volKey]*frameInfo{}
	for _, fr := range s.frames {
		k := keyOf(fr)
		if keys[k] == nil {
			keys[k] = fr
		}
	}
	vols := make([]volKey, 0, len(keys))
	for k := range keys {
		vols = append(vols, k)
	}
	order := func(k volKey) [5]int64 {
		switch s.Varying {
		case "InversionTime":
			return [5]int64{k.ti, k.fa, k.te, k.tr, int64(k.echo)}
		case "FlipAngle":
			return [5]int64{k.fa, k.ti, k.te, k.tr, int64(k.echo)}
		case "RepetitionTime":
			return [5]int64{k.tr, k.ti, k.fa, k.te, int64(k.echo)}
		}
		return [5]int64{k.te, int64(k.echo), k.ti, k.fa, k.tr}
	}
	sort.Slice(vols, func(a, b int) bool {
		oa, ob := order(vols[a]), order(vols[b])
		for i := range oa {
			if oa[i] != ob[i] {
				return oa[i] < ob[i]
			}
		}
		return false
	})
	volIndex := make(map[volKey]int, len(vols))
	for i, k := range vols {
		volIndex[k] = i
	}

	// Slices: cluster the positions along n.
	type pos struct {
		s  float64
		fr *frameInfo
	}
	ps := make([]pos, len(s.frames))
	for i, fr := range s.frames {
		ps[i] = pos{dot(n, fr.ipp), fr}
	}
	sort.SliceStable(ps, func(a, b int) bool { return ps[a].s < ps[b].s })
	var centres []float64
	slice := make(map[*frameInfo]int, len(ps))
	start := math.Inf(-1)
	for _, p := range ps {
		if p.s-start > sameTol {
			start = p.s
			centres = append(centres, p.s)
		}
		slice[p.fr] = len(centres) - 1
	}
	nz, nt := len(centres), len(vols)
	lay := &layout{nx: f0.file.cols, ny: f0.file.rows, nz: nz, nt: nt, tol: sameTol}
	if _, err := volume.Count([4]int{lay.nx, lay.ny, nz, nt}); err != nil {
		return fail("", "grid %d×%d×%d×%d is too large", lay.nx, lay.ny, nz, nt)
	}
	lay.cells = make([]*frameInfo, nz*nt)
	dropped := map[*frameInfo]bool{}
	for _, fr := range s.frames {
		k, t := slice[fr], volIndex[keyOf(fr)]
		if old := lay.cells[k+nz*t]; old != nil {
			if dup, err := duplicate(old, fr); err != nil {
				return nil, err
			} else if dup {
				s.Notes = append(s.Notes, fmt.Sprintf("%s repeats %s (same SOP Instance UID and pixels); left out", frameName(fr), frameName(old)))
				dropped[fr] = true
				continue
			}
			why := ""
			if old.file.sopInstance != "" && old.file.sopInstance == fr.file.sopInstance {
				why = " with the same SOP Instance UID but different pixels"
			}
			return fail(frameName(fr), "two images for slice %d of %d (%.4g mm along the slice normal) at %s%s: %s and %s",
				k+1, nz, centres[k], describe(s, old), why, frameName(old), frameName(fr))
		}
		lay.cells[k+nz*t] = fr
	}
	if len(dropped) > 0 {
		kept := s.frames[:0:0]
		for _, fr := range s.frames {
			if !dropped[fr] {
				kept = append(kept, fr)
			}
		}
		s.frames = kept
	}
	missing := 0
	var first string
	for t := 0; t < nt; t++ {
		for k := 0; k < nz; k++ {
			if lay.cells[k+nz*t] == nil {
				if missing == 0 {
					first = fmt.Sprintf("slice %d of %d (%.4g mm along the slice normal) has no image at %s", k+1, nz, centres[k], describe(s, keys[vols[t]]))
				}
				missing++
			}
		}
	}
	if missing > 0 {
		if missing > 1 {
			first += fmt.Sprintf(" (%d of %d images missing)", missing, nz*nt)
		}
		lay.cells = nil
		return lay, &SeriesError{Path: s.Source.Path, Series: s.ID, Reason: first, Err: ErrIncomplete}
	}

	// Reference position of each slice: its image in the first volume;
	// every volume must agree.
	ref := make([][3]float64, nz)
	for k := 0; k < nz; k++ {
		ref[k] = lay.cells[k].ipp
		for t := 1; t < nt; t++ {
			fr := lay.cells[k+nz*t]
			if d := dist(fr.ipp, ref[k]); d > sameTol {
				return lay, &SeriesError{Path: frameName(fr), Series: s.ID, Err: ErrIncomplete,
					Reason: fmt.Sprintf("slice %d is %.3g mm away from the same slice of %s", k+1, d, frameName(lay.cells[k]))}
			}
		}
	}

	var d [3]float64
	if nz > 1 {
		for i := range d {
			d[i] = (ref[nz-1][i] - ref[0][i]) / float64(nz-1)
		}
		step := math.Sqrt(dot(d, d))
		// A gap of about twice the usual step is a missing slice: name
		// the slices on either side of it.
		gaps := make([]float64, nz-1)
		for k := range gaps {
			gaps[k] = dot(n, ref[k+1]) - dot(n, ref[k])
		}
		sorted := append([]float64(nil), gaps...)
		sort.Float64s(sorted)
		usual := sorted[len(sorted)/2]
		for k, g := range gaps {
			if usual > 0 && g > 1.5*usual {
				return lay, &SeriesError{Path: s.Source.Path, Series: s.ID, Err: ErrIncomplete,
					Reason: fmt.Sprintf("a slice is missing between slice %d (%.4g mm along the slice normal, %s) and slice %d (%.4g mm, %s): gap %.4g mm, usual step %.4g mm",
						k+1, centres[k], frameName(lay.cells[k]), k+2, centres[k+1], frameName(lay.cells[k+1]), g, usual)}
			}
		}
		tol := math.Max(math.Max(spacingTol, spacingRel*step), roundingTol)
		worst, at := 0.0, 0
		for k := 1; k < nz-1; k++ {
			var want [3]float64
			for i := range want {
				want[i] = ref[0][i] + float64(k)*d[i]
			}
			if dv := dist(ref[k], want); dv > worst {
				worst, at = dv, k
			}
		}
		if worst > tol {
			written := ""
			if quantum > 0 {
				written = fmt.Sprintf(", positions written to %.3g mm", 2*quantum)
			}
			return lay, &SeriesError{Path: frameName(lay.cells[at]), Series: s.ID, Err: ErrIncomplete,
				Reason: fmt.Sprintf("uneven slice spacing: slice %d of %d is %.3g mm off an even step of %.4g mm (tolerance %.3g mm%s)", at+1, nz, worst, step, tol, written)}
		}
	} else {
		step := f0.between
		if !(step > 0) {
			step = f0.thickness
		}
		if !(step > 0) {
			step = 1
		}
		for i := range d {
			d[i] = n[i] * step
		}
	}

	// PS3.3 Eq. C.7.6.2.1-1 with i = column, j = row: columns X·Δi, Y·Δj,
	// d and IPP of the first slice (LPS), then diag(−1,−1,1,1) to RAS
	// (check-values §3.4).
	di, dj := f0.spacing[1], f0.spacing[0]
	cols := [4][3]float64{
		{x[0] * di, x[1] * di, x[2] * di},
		{y[0] * dj, y[1] * dj, y[2] * dj},
		d,
		ref[0],
	}
	sign := [3]float64{-1, -1, 1}
	for r := 0; r < 3; r++ {
		for c := 0; c < 4; c++ {
			lay.affine[r][c] = sign[r]*cols[c][r] + 0
		}
	}
	lay.affine[3] = [4]float64{0, 0, 0, 1}

	lay.acq = make([]volume.Acquisition, nt)
	for t, k := range vols {
		fr := keys[k]
		lay.acq[t] = volume.Acquisition{EchoTime: fr.te, InversionTime: fr.ti, RepetitionTime: fr.tr, FlipAngle: fr.fa}
	}
	return lay, nil
}

// describe names the volume of fr by the varying parameter.
func describe(s *Series, fr *frameInfo) string {
	switch s.Varying {
	case "InversionTime":
		return fmt.Sprintf("InversionTime %g ms", fr.ti)
	case "FlipAngle":
		return fmt.Sprintf("FlipAngle %g°", fr.fa)
	case "RepetitionTime":
		return fmt.Sprintf("RepetitionTime %g ms", fr.tr)
	case "EchoNumber":
		return fmt.Sprintf("EchoNumber %d", fr.echo)
	}
	if fr.echo > 0 {
		return fmt.Sprintf("EchoTime %g ms (echo %d)", fr.te, fr.echo)
	}
	return fmt.Sprintf("EchoTime %g ms", fr.te)
}

// frameName names the file of fr, with the frame number for multi-frame
// files.
func frameName(fr *frameInfo) string {
	if fr.file.nFrames > 1 {
		return fmt.Sprintf("%s frame %d", fr.file.raw.path, fr.index+1)
	}
	return fr.file.raw.path
}

func cross(a, b [3]float64) [3]float64 {
	return [3]float64{a[1]*b[2] - a[2]*b[1], a[2]*b[0] - a[0]*b[2], a[0]*b[1] - a[1]*b[0]}
}

func dot(a, b [3]float64) float64 { return a[0]*b[0] + a[1]*b[1] + a[2]*b[2] }

func dist(a, b [3]float64) float64 {
	d := [3]float64{a[0] - b[0], a[1] - b[1], a[2] - b[2]}
	return math.Sqrt(dot(d, d))
}

// duplicate reports whether b is a copy of a: the same SOP Instance UID
// (PS3.3 C.12.1.1.1: it identifies one image) and the same decoded
// samples (the same image stored in two transfer syntaxes is one image).
// A read error is returned as it is.
func duplicate(a, b *frameInfo) (bool, error) {
	fa, fb := a.file, b.file
	if fa.sopInstance == "" || fa.sopInstance != fb.sopInstance || a.index != b.index ||
		bytesPerSample(fa) != bytesPerSample(fb) || fa.raw.pix.tag != fb.raw.pix.tag {
		return false, nil
	}
	pa, err := samples(fa)
	if err != nil {
		return false, err
	}
	pb, err := samples(fb)
	if err != nil {
		return false, err
	}
	return bytes.Equal(pa, pb), nil
}

// samples returns the pixel data of f decoded to little-endian samples.
func samples(f *fileInfo) ([]byte, error) {
	const limit = 1 << 30
	if f.raw.syn.encapsulated {
		return readCompressed(f, limit)
	}
	b, err := readPixels(f, nil, limit)
	if err == nil && f.raw.syn.bo == binary.BigEndian {
		swapBytes(b, bytesPerSample(f))
	}
	return b, err
}
