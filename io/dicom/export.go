package dicom

import (
	"crypto/rand"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"sort"
	"strings"
	"time"

	"github.com/tauvox/tauvox/internal/output"
	"github.com/tauvox/tauvox/volume"
)

// sopParametricMap is Parametric Map Storage (check-values §3.3, from the
// pydicom UID dictionary).
const sopParametricMap = "1.2.840.10008.5.1.4.1.1.30"

// MapOptions are the settings of WriteParametricMap. The zero value (and
// nil) writes a map of unknown quantity in arbitrary units into a new study.
type MapOptions struct {
	// Quantity names the mapped quantity ("T2", "R1", ...); it becomes the
	// ContentLabel, the LUTLabel and part of the LUTExplanation. Defaults to
	// "MAP".
	Quantity string
	// Unit is the unit of the values as tauvox writes it: "ms", "s", "1/s",
	// "fraction", "ratio", "code", "arbitrary" (the default). It chooses
	// the UCUM code of MeasurementUnitsCodeSequence (see UCUM).
	Unit string
	// Description is the SeriesDescription; defaults to Quantity + " map
	// (tauvox)".
	Description string
	// SeriesNumber defaults to 1 if 0.
	SeriesNumber int
	// Software is written as SoftwareVersions; defaults to "unknown".
	Software string
	// Like, when not nil, is the source series (from Scan) the map was made
	// from: the map joins its study (StudyInstanceUID, study date and time)
	// and frame of reference (FrameOfReferenceUID), and its slices must lie
	// at positions of the source's images. No patient attribute is copied
	// unless KeepIdentifiers is set.
	Like *Series
	// KeepIdentifiers copies the patient name, patient ID, birth date and
	// accession number of Like (which must have been scanned with
	// ScanOptions.KeepIdentifiers). Without it the patient module is
	// written empty (type 2 attributes without a value).
	KeepIdentifiers bool
	// Created is the content date and time; defaults to the current time.
	Created time.Time
	// Rand is the source of the UIDs and the file name. Defaults to
	// crypto/rand.
	Rand io.Reader
}

// UCUM returns the code of MeasurementUnitsCodeSequence for a unit as
// tauvox writes it: value, coding scheme and meaning. The codes are UCUM
// (CID 7181 uses UCUM; the standard's own examples are "{ratio}" and
// "mm2/s", check-values §3.2); "ms", "s" and "/s" are UCUM units from
// memory; "1" ("no units") for codes and arbitrary units is from memory.
func UCUM(unit string) (value, scheme, meaning string) {
	switch strings.ToLower(unit) {
	case "ms":
		return "ms", "UCUM", "millisecond"
	case "s":
		return "s", "UCUM", "second"
	case "1/s", "/s", "s-1", "hz":
		return "/s", "UCUM", "per second"
	case "fraction", "ratio", "r2", "{ratio}":
		return "{ratio}", "UCUM", "ratio"
	case "%", "percent":
		return "%", "UCUM", "percent"
	}
	return "1", "UCUM", "no units"
}

// WriteParametricMap writes a 3-D map as one Parametric Map Storage file
// (PS3.3 A.75, SOP class 1.2.840.10008.5.1.4.1.1.30) in explicit VR little
// endian into the folder dir, which must exist, and returns its path. The
// values are stored unchanged as 32-bit floats in Float Pixel Data
// (7FE0,0008), one frame per slice in k order; NaN (no value) stays NaN.
// The functional groups are those PS3.3 Table A.75-2 requires: shared
// Pixel Measures, Plane Orientation, Frame Anatomy, Identity Pixel Value
// Transformation, Frame VOI LUT (window from the 1st to 99th percentile of
// the finite values), Real World Value Mapping (slope 1, intercept 0, the
// unit as a UCUM code, the first and last values mapped as double floats)
// and Parametric Map Frame Type; per frame Frame Content and Plane
// Position. The geometry comes from the affine as in WriteSeries (RAS →
// LPS, check-values §3.4). UIDs are new 2.25 UUID-derived UIDs.
//
// It returns an error for an image that is not one 3-D volume, an affine
// DICOM cannot express (sheared, zero voxel size), a Like series whose
// images are not at the map's slice positions, or a failed write.
func WriteParametricMap(dir string, im *volume.Image, opt *MapOptions) (string, error) {
	var o MapOptions
	if opt != nil {
		o = *opt
	}
	fail := func(format string, a ...any) (string, error) {
		return "", fmt.Errorf("%s: dicom: %s", output.Line(dir), fmt.Sprintf(format, a...))
	}
	if err := im.Validate(); err != nil {
		return fail("%v", err)
	}
	if im.Dims[3] != 1 {
		return fail("a parametric map holds one volume, the image has %d", im.Dims[3])
	}
	nx, ny, nz := im.Dims[0], im.Dims[1], im.Dims[2]
	if nx > 0xFFFF || ny > 0xFFFF {
		return fail("matrix %d×%d does not fit Rows/Columns (US)", nx, ny)
	}
	if 4*int64(nx)*int64(ny)*int64(nz) > math.MaxUint32-1 {
		return fail("pixel data larger than 4 GiB cannot be stored in one file")
	}
	g, err := lpsGeometry(im.Affine)
	if err != nil {
		return fail("%v", err)
	}
	rnd := o.Rand
	if rnd == nil {
		rnd = rand.Reader
	}
	w := &seriesWriter{dir: dir, rnd: rnd}
	uids := make([]string, 4)
	for i := range uids {
		if uids[i], err = w.uid(); err != nil {
			return "", err
		}
	}
	study, frame, seriesUID, sop := uids[0], uids[1], uids[2], uids[3]
	dimOrg, err := w.uid()
	if err != nil {
		return "", err
	}
	created := o.Created
	if created.IsZero() {
		created = time.Now()
	}
	studyWhen := created
	var ids *Identifiers
	if s := o.Like; s != nil {
		if len(s.frames) == 0 {
			return fail("the --like series holds no image")
		}
		f0 := s.frames[0].file
		if s.StudyUID != "" {
			study = s.StudyUID
		}
		if f0.frameOfRef != "" {
			frame = f0.frameOfRef
		}
		if t, err := time.Parse(time.RFC3339Nano, s.Source.AcquiredAt); err == nil {
			studyWhen = t
		} else if t, err := time.Parse("2006-01-02T15:04:05", s.Source.AcquiredAt); err == nil {
			studyWhen = t
		}
		if err := g.matches(s, nz); err != nil {
			return fail("%v", err)
		}
		if o.KeepIdentifiers {
			ids = s.Identifiers
			if ids == nil {
				return fail("identifiers asked for but the --like series was scanned without them")
			}
		}
	}
	quantity := orDefault(o.Quantity, "MAP")
	unit := orDefault(o.Unit, "arbitrary")

	var d dataset
	date, tm := created.Format("20060102"), created.Format("150405.000000")
	sdate, stm := studyWhen.Format("20060102"), studyWhen.Format("150405.000000")
	d.str(0x00080005, "CS", "ISO_IR 192")
	d.str(0x00080008, "CS", "DERIVED", "PRIMARY", frameFlavor(quantity), "NONE")
	d.str(0x00080012, "DA", date)
	d.str(0x00080013, "TM", tm)
	d.str(0x00080016, "UI", sopParametricMap)
	d.str(0x00080018, "UI", sop)
	d.str(0x00080020, "DA", sdate)
	d.str(0x00080021, "DA", date)
	d.str(0x00080023, "DA", date)
	d.str(0x00080030, "TM", stm)
	d.str(0x00080031, "TM", tm)
	d.str(0x00080033, "TM", tm)
	d.str(0x00080060, "CS", "MR")
	d.str(0x00080070, "LO", "tauvox")
	d.str(0x00080090, "PN")
	d.str(0x0008103E, "LO", clip(orDefault(o.Description, quantity+" map (tauvox)"), 64))
	d.str(0x00081090, "LO", "tauvox")
	d.str(0x00181000, "LO", "0") // DeviceSerialNumber, type 1: software has none
	d.str(0x00181020, "LO", clip(orDefault(o.Software, "unknown"), 64))
	d.str(0x00189004, "CS", "RESEARCH")
	if ids != nil {
		d.str(0x00080050, "SH", clip(ids.AccessionNumber, 16))
		d.str(0x00100010, "PN", clip(ids.PatientName, 64))
		d.str(0x00100020, "LO", clip(ids.PatientID, 64))
		d.str(0x00100030, "DA", clip(ids.PatientBirthDate, 8))
	} else {
		d.str(0x00080050, "SH")
		d.str(0x00100010, "PN")
		d.str(0x00100020, "LO")
		d.str(0x00100030, "DA")
	}
	d.str(0x00100040, "CS")
	d.str(0x0020000D, "UI", study)
	d.str(0x0020000E, "UI", seriesUID)
	d.str(0x00200010, "SH")
	num := o.SeriesNumber
	if num == 0 {
		num = 1
	}
	d.is(0x00200011, num)
	d.is(0x00200013, 1)
	d.str(0x00200052, "UI", frame)
	d.str(0x00201040, "LO")
	d.us(0x00280002, 1)
	d.str(0x00280004, "CS", "MONOCHROME2")
	d.is(0x00280008, nz)
	d.us(0x00280010, uint16(ny))
	d.us(0x00280011, uint16(nx))
	d.us(0x00280100, 32)
	d.str(0x00280301, "CS", "NO")
	d.str(0x00280302, "CS", "NO")
	d.str(0x00282110, "CS", "00")
	d.seq(0x00400555) // AcquisitionContextSequence, type 2: empty
	d.str(0x00700080, "CS", contentLabel(quantity))
	d.str(0x00700081, "LO", clip(quantity+" in "+unit+", fitted by tauvox", 64))
	d.str(0x00700084, "PN")
	d.str(0x20500020, "CS", "IDENTITY")

	// Multi-frame Dimension: one dimension, the position in the stack.
	var org dataset
	org.str(0x00209164, "UI", dimOrg)
	d.seq(0x00209221, &org)
	var dim dataset
	dim.str(0x00209164, "UI", dimOrg)
	dim.at(0x00209165, 0x00209057)
	dim.at(0x00209167, 0x00209111)
	dim.str(0x00209421, "LO", "slice")
	d.seq(0x00209222, &dim)
	d.str(0x00209311, "CS", "3D")

	// Shared functional groups.
	lo, hi := finiteRange(im.Data)
	wlo, whi := percentileWindow(im.Data)
	var pm, po, fa, region, pv, voi, rw, units, ft dataset
	pm.ds(0x00280030, g.dj, g.di)
	pm.ds(0x00180050, g.step)
	pm.ds(0x00180088, g.step)
	po.ds(0x00200037, g.x[0], g.x[1], g.x[2], g.y[0], g.y[1], g.y[2])
	// Anatomic region "Entire body" (SNOMED CT 38266002, from memory): a
	// map of a phantom or of an unknown region.
	region.str(0x00080100, "SH", "38266002")
	region.str(0x00080102, "SH", "SCT")
	region.str(0x00080104, "LO", "Entire body")
	fa.seq(0x00082218, &region)
	fa.str(0x00209072, "CS", "U")
	pv.ds(0x00281052, 0)
	pv.ds(0x00281053, 1)
	pv.str(0x00281054, "LO", "US")
	voi.ds(0x00281050, (wlo+whi)/2)
	voi.ds(0x00281051, math.Max(whi-wlo, 1e-6))
	voi.str(0x00281056, "CS", "LINEAR_EXACT") // widths below 1 are allowed only so (PS3.3 C.11.2.1.3)
	cv, cs, cm := UCUM(unit)
	units.str(0x00080100, "SH", cv)
	units.str(0x00080102, "SH", cs)
	units.str(0x00080104, "LO", cm)
	rw.str(0x00283003, "LO", clip(quantity+" ("+unit+")", 64))
	rw.seq(0x004008EA, &units)
	rw.fd(0x00409213, hi)
	rw.fd(0x00409214, lo)
	rw.str(0x00409210, "SH", clip(contentLabel(quantity), 16))
	rw.fd(0x00409224, 0)
	rw.fd(0x00409225, 1)
	ft.str(0x00089007, "CS", "DERIVED", "PRIMARY", frameFlavor(quantity), "NONE")
	var shared dataset
	shared.seq(0x00289110, &pm)
	shared.seq(0x00209116, &po)
	shared.seq(0x00209071, &fa)
	shared.seq(0x00289145, &pv)
	shared.seq(0x00289132, &voi)
	shared.seq(0x00409096, &rw)
	shared.seq(0x00409092, &ft)
	d.seq(0x52009229, &shared)

	per := make([]*dataset, nz)
	for k := range per {
		var fc, pp dataset
		fc.ul(0x00209157, uint32(k+1))
		fc.str(0x00209056, "SH", "1")
		fc.ul(0x00209057, uint32(k+1))
		pp.ds(0x00200032, g.position(k)...)
		per[k] = &dataset{}
		per[k].seq(0x00209111, &fc)
		per[k].seq(0x00209113, &pp)
	}
	d.seq(0x52009230, per...)

	pix := make([]byte, 4*len(im.Data))
	for i, v := range im.Data {
		binary.LittleEndian.PutUint32(pix[4*i:], math.Float32bits(v))
	}
	d.put(0x7FE00008, "OF", pix)
	if err := w.file(sopParametricMap, sop, &d); err != nil {
		return "", err
	}
	return w.written[0], nil
}

// contentLabel makes a CS value (upper-case letters, digits, '_', at most
// 16 characters, PS3.5 Table 6.2-1) of a quantity name.
func contentLabel(q string) string {
	s := strings.Map(func(r rune) rune {
		switch {
		case r >= 'a' && r <= 'z':
			return r - 'a' + 'A'
		case r >= 'A' && r <= 'Z', r >= '0' && r <= '9':
			return r
		case r == '*':
			return 'S'
		}
		return '_'
	}, q)
	if len(s) > 16 {
		s = s[:16]
	}
	if s == "" {
		return "MAP"
	}
	return s
}

// frameFlavor is value 3 (image flavor) of ImageType and FrameType: the
// MR image flavour defined terms for the quantities that have one
// (T1_MAP, T2_MAP, T2_STAR_MAP, PROTON_DENSITY, R_COEFFICIENT for the fit's
// R²; the terms as listed in dicom3tools' dciodvfy, whose Parametric Map
// check accepts no value 3 without a warning), else the quantity's content
// label with "_MAP" (defined terms may be extended).
func frameFlavor(q string) string {
	switch strings.ToLower(strings.TrimSuffix(strings.TrimSuffix(q, "map"), "Map")) {
	case "t1":
		return "T1_MAP"
	case "t2":
		return "T2_MAP"
	case "t2star", "t2*":
		return "T2_STAR_MAP"
	case "m0", "pd", "s0":
		return "PROTON_DENSITY"
	case "fitquality":
		return "R_COEFFICIENT"
	}
	s := contentLabel(q)
	if len(s) > 12 {
		s = s[:12]
	}
	return s + "_MAP"
}

// lpsGeometry is the DICOM geometry of an affine: unit row and column
// directions (LPS), spacings, slice step and the first voxel's position,
// used by WriteSeries and WriteParametricMap.
type lpsGeom struct {
	x, y, d      [3]float64
	origin       [3]float64
	di, dj, step float64
}

func lpsGeometry(a volume.Affine) (*lpsGeom, error) {
	var g lpsGeom
	for r := 0; r < 3; r++ {
		s := 1.0
		if r < 2 {
			s = -1
		}
		g.x[r], g.y[r], g.d[r], g.origin[r] = s*a[r][0], s*a[r][1], s*a[r][2], s*a[r][3]
	}
	g.di, g.dj = math.Sqrt(dot(g.x, g.x)), math.Sqrt(dot(g.y, g.y))
	g.step = math.Sqrt(dot(g.d, g.d))
	if !(g.di > 0) || !(g.dj > 0) || !(g.step > 0) || math.IsInf(g.di+g.dj+g.step, 0) {
		return nil, fmt.Errorf("affine has a zero or non-finite voxel size")
	}
	for r := range g.x {
		g.x[r] /= g.di
		g.y[r] /= g.dj
	}
	n := cross(g.x, g.y)
	if math.Abs(dot(g.x, g.y)) > 1e-6 || dist(cross(n, g.d), [3]float64{}) > 1e-6*g.step {
		return nil, fmt.Errorf("affine columns are not perpendicular; DICOM cannot store a sheared grid")
	}
	return &g, nil
}

func (g *lpsGeom) position(k int) []float64 {
	return []float64{g.origin[0] + float64(k)*g.d[0], g.origin[1] + float64(k)*g.d[1], g.origin[2] + float64(k)*g.d[2]}
}

// matches checks that every slice of the map lies at the position and
// orientation of an image of s (0.05 mm, 1e-4 in the direction cosines).
func (g *lpsGeom) matches(s *Series, nz int) error {
	for k := 0; k < nz; k++ {
		p := g.position(k)
		found := false
		for _, f := range s.frames {
			ok := f.hasIPP && f.hasIOP
			for i := 0; ok && i < 3; i++ {
				ok = math.Abs(f.ipp[i]-p[i]) <= 0.05 && math.Abs(f.iop[i]-g.x[i]) <= 1e-4 && math.Abs(f.iop[3+i]-g.y[i]) <= 1e-4
			}
			if ok {
				found = true
				break
			}
		}
		if !found {
			return fmt.Errorf("slice %d of the map (at %.2f, %.2f, %.2f mm LPS) is not at an image of the --like series %s; a map joins only the frame of reference it was fitted in",
				k, p[0], p[1], p[2], s.ID)
		}
	}
	return nil
}

func finiteRange(v []float32) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, x := range v {
		if f := float64(x); !math.IsNaN(f) && !math.IsInf(f, 0) {
			lo, hi = math.Min(lo, f), math.Max(hi, f)
		}
	}
	if lo > hi {
		return 0, 0
	}
	return lo, hi
}

// percentileWindow returns the 1st and 99th percentiles of the finite
// values (nearest rank), the display window of the Frame VOI LUT.
func percentileWindow(v []float32) (lo, hi float64) {
	var f []float64
	for _, x := range v {
		if y := float64(x); !math.IsNaN(y) && !math.IsInf(y, 0) {
			f = append(f, y)
		}
	}
	if len(f) == 0 {
		return 0, 1
	}
	sort.Float64s(f)
	lo, hi = f[len(f)/100], f[len(f)-1-len(f)/100]
	if hi <= lo {
		hi = lo + 1
	}
	return lo, hi
}

// HasGrid reports whether every slice of a map on the grid of affine a
// with nz slices lies at the position and orientation of an image of s, as
// WriteParametricMap requires of MapOptions.Like.
func (s *Series) HasGrid(a volume.Affine, nz int) bool {
	g, err := lpsGeometry(a)
	return err == nil && g.matches(s, nz) == nil
}
