package dicom

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	lib "github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// SOP classes read as enhanced (multi-frame with functional groups),
// PS3.4 Annex B / check-values §3.3.
const (
	sopMR                = "1.2.840.10008.5.1.4.1.1.4"
	sopEnhancedMR        = "1.2.840.10008.5.1.4.1.1.4.1"
	sopLegacyEnhancedMR  = "1.2.840.10008.5.1.4.1.1.4.4"
	sopEnhancedMRColour  = "1.2.840.10008.5.1.4.1.1.4.3"
	maxFramesPerFile     = 1 << 16
	maxMatrix            = 1 << 15
	defaultMaxHeadBytes  = 64 << 20
	defaultMaxImageBytes = 1 << 31
)

// Identifiers holds the patient identifiers of a series. Scan fills it
// only when ScanOptions.KeepIdentifiers is set.
type Identifiers struct {
	PatientName      string
	PatientID        string
	PatientBirthDate string
	AccessionNumber  string
}

// fileInfo is what the grouping pass keeps of one file.
type fileInfo struct {
	raw *rawFile

	sopClass, sopInstance           string
	seriesUID, studyUID, frameOfRef string
	description                     string
	seriesNumber                    int
	hasNumber                       bool
	imageType                       []string
	scanningSeq, seqName, echoPulse string
	manufacturer, model, station    string
	field                           float64
	acquired                        string // DICOM DT form, YYYYMMDDHHMMSS.FFFFFF[&ZZXX]
	rows, cols                      int
	bitsAlloc, bitsStored, pixelRep int
	samples                         int
	nFrames                         int
	enhanced                        bool
	mosaic                          string // why the frame looks like a mosaic of slices ("" when not)
	ids                             *Identifiers

	frames []frameInfo
}

// frameInfo holds the per-image attributes of a frame (the one image of a
// classic file, or one frame of an enhanced file).
type frameInfo struct {
	file      *fileInfo
	index     int // frame number in the file, 0-based
	ipp       [3]float64
	iop       [6]float64
	spacing   [2]float64 // row spacing, column spacing (PixelSpacing order)
	thickness float64
	between   float64
	ippDec    int // decimal places of the ImagePositionPatient strings (-1: binary or absent)
	hasIPP    bool
	hasIOP    bool
	hasPS     bool
	te, ti    float64
	tr, fa    float64
	echo      int
	slope     float64
	intercept float64
	// Real World Value Mapping (PS3.3 C.7.6.16.2.11): stored value →
	// real-world value by slope and intercept, replacing the rescale
	// when present (NaN: absent); rwvNote says why one present is unused.
	rwvSlope, rwvIntercept float64
	rwvUnits, rwvNote      string
	// privScale is the vendor's private floating-point scale slope
	// (2005,100E) (NaN: absent); recorded, and a differing value between
	// images warned about, not applied.
	privScale float64
	kind      string // image/frame type used to split series
}

// parseHead hands the checked header bytes of rf to the library and
// extracts the attributes tauvox uses. The library's panics on odd input
// become FormatErrors.
func parseHead(rf *rawFile, keepIDs bool) (fi *fileInfo, err error) {
	return parseHeadWith(rf, keepIDs, nil)
}

// parseHeadWith is parseHead with br (nil: a new one) as the library's
// buffered reader: the library keeps a *bufio.Reader of 4 KiB or more as
// it is, so one per goroutine saves an allocation per file.
func parseHeadWith(rf *rawFile, keepIDs bool, br *bufio.Reader) (fi *fileInfo, err error) {
	meta := metaExplicit
	switch {
	case rf.syn.implicit:
		meta = metaImplicit
	case rf.syn.bo != nil && rf.syn.bo.Uint16([]byte{0, 1}) == 1:
		meta = metaBig
	}
	defer func() {
		if r := recover(); r != nil {
			fi, err = nil, formatErr(rf.path, fmt.Sprintf("header cannot be parsed (%v)", r), nil)
		}
	}()
	n := int64(len(meta) + len(rf.head))
	var in io.Reader = io.MultiReader(bytes.NewReader(meta), bytes.NewReader(rf.head))
	if br != nil {
		br.Reset(in)
		defer br.Reset(nil)
		in = br
	}
	ds, err := lib.Parse(in, n, nil, lib.SkipPixelData(), lib.AllowUnknownSpecificCharacterSet())
	if err != nil {
		return nil, formatErr(rf.path, "header", err)
	}
	return extract(rf, ds.Elements, keepIDs)
}

func extract(rf *rawFile, top []*lib.Element, keepIDs bool) (*fileInfo, error) {
	fi := &fileInfo{raw: rf}
	fi.sopClass = str(top, tag.SOPClassUID)
	if fi.sopClass == "" {
		fi.sopClass = rf.metaSOP
	}
	fi.sopInstance = str(top, tag.SOPInstanceUID)
	fi.seriesUID = str(top, tag.SeriesInstanceUID)
	fi.studyUID = str(top, tag.StudyInstanceUID)
	fi.frameOfRef = str(top, tag.FrameOfReferenceUID)
	fi.description = text(top, tag.SeriesDescription)
	if v, ok := integer(top, tag.SeriesNumber); ok {
		fi.seriesNumber, fi.hasNumber = v, true
	}
	fi.imageType = strs(top, tag.ImageType)
	fi.scanningSeq = strings.Join(strs(top, tag.ScanningSequence), `\`)
	fi.seqName = str(top, tag.SequenceName)
	if fi.seqName == "" {
		fi.seqName = str(top, tag.PulseSequenceName)
	}
	fi.echoPulse = str(top, tag.EchoPulseSequence)
	fi.manufacturer = text(top, tag.Manufacturer)
	fi.model = text(top, tag.ManufacturerModelName)
	fi.station = text(top, tag.StationName)
	fi.field = num(top, tag.MagneticFieldStrength)
	fi.acquired = dateTime(top)
	if keepIDs {
		fi.ids = &Identifiers{
			PatientName:      str(top, tag.PatientName),
			PatientID:        str(top, tag.PatientID),
			PatientBirthDate: str(top, tag.PatientBirthDate),
			AccessionNumber:  str(top, tag.AccessionNumber),
		}
	}
	fi.enhanced = fi.sopClass == sopEnhancedMR || fi.sopClass == sopLegacyEnhancedMR || fi.sopClass == sopEnhancedMRColour ||
		find(top, tag.PerFrameFunctionalGroupsSequence) != nil

	if !rf.pix.found {
		return fi, nil // not an image; the caller decides
	}
	var ok bool
	if fi.rows, ok = integer(top, tag.Rows); !ok {
		return nil, formatErr(rf.path, "image without Rows (0028,0010)", nil)
	}
	if fi.cols, ok = integer(top, tag.Columns); !ok {
		return nil, formatErr(rf.path, "image without Columns (0028,0011)", nil)
	}
	if fi.rows < 1 || fi.cols < 1 || fi.rows > maxMatrix || fi.cols > maxMatrix {
		return nil, formatErr(rf.path, fmt.Sprintf("impossible matrix %d×%d (Columns×Rows)", fi.cols, fi.rows), nil)
	}
	fi.bitsAlloc, _ = integer(top, tag.BitsAllocated)
	fi.bitsStored, ok = integer(top, tag.BitsStored)
	if !ok {
		fi.bitsStored = fi.bitsAlloc
	}
	fi.pixelRep, _ = integer(top, tag.PixelRepresentation)
	fi.samples, ok = integer(top, tag.SamplesPerPixel)
	if !ok {
		fi.samples = 1
	}
	fi.nFrames = 1
	if v, ok := integer(top, tag.NumberOfFrames); ok {
		fi.nFrames = v
	}
	if fi.nFrames < 1 || fi.nFrames > maxFramesPerFile {
		return nil, formatErr(rf.path, fmt.Sprintf("impossible NumberOfFrames %d", fi.nFrames), nil)
	}
	fi.mosaic = mosaicOf(top, fi)

	base := frameInfo{
		file:      fi,
		te:        num(top, tag.EchoTime),
		ti:        num(top, tag.InversionTime),
		tr:        num(top, tag.RepetitionTime),
		fa:        num(top, tag.FlipAngle),
		slope:     num(top, tag.RescaleSlope),
		intercept: num(top, tag.RescaleIntercept),
		thickness: num(top, tag.SliceThickness),
		between:   num(top, tag.SpacingBetweenSlices),
		kind:      strings.Join(fi.imageType, `\`),
	}
	if v, ok := integer(top, tag.EchoNumbers); ok {
		base.echo = v
	}
	base.rwvSlope, base.rwvIntercept, base.rwvUnits, base.rwvNote = rwvOf(firstItem(find(top, tag.RealWorldValueMappingSequence)))
	base.privScale = privateScale(top)
	if bad := badRescale(top); bad != "" {
		return nil, formatErr(rf.path, bad, nil)
	}
	base.hasIPP = vec(top, tag.ImagePositionPatient, base.ipp[:])
	base.ippDec = decimals(top, tag.ImagePositionPatient)
	base.hasIOP = vec(top, tag.ImageOrientationPatient, base.iop[:])
	base.hasPS = vec(top, tag.PixelSpacing, base.spacing[:])

	if !fi.enhanced {
		fi.frames = []frameInfo{base}
		return fi, nil
	}
	// Enhanced MR: per-frame functional groups first, then the shared
	// group, then the top level (PS3.3 C.7.6.16; check-values §3.1).
	shared := firstItem(find(top, tag.SharedFunctionalGroupsSequence))
	perFrame := itemsOf(find(top, tag.PerFrameFunctionalGroupsSequence))
	if len(perFrame) != fi.nFrames {
		return nil, formatErr(rf.path, fmt.Sprintf("PerFrameFunctionalGroupsSequence has %d items for %d frames", len(perFrame), fi.nFrames), nil)
	}
	fi.frames = make([]frameInfo, fi.nFrames)
	for k := range fi.frames {
		fr := base
		fr.index = k
		groups := [][]*lib.Element{perFrame[k], shared}
		macro := func(seq tag.Tag) []*lib.Element {
			for _, g := range groups {
				if it := firstItem(find(g, seq)); it != nil {
					return it
				}
			}
			return nil
		}
		if m := macro(tag.PlanePositionSequence); m != nil {
			if vec(m, tag.ImagePositionPatient, fr.ipp[:]) {
				fr.hasIPP = true
				fr.ippDec = decimals(m, tag.ImagePositionPatient)
			}
		}
		if m := macro(tag.PlaneOrientationSequence); m != nil {
			fr.hasIOP = vec(m, tag.ImageOrientationPatient, fr.iop[:]) || fr.hasIOP
		}
		if m := macro(tag.PixelMeasuresSequence); m != nil {
			fr.hasPS = vec(m, tag.PixelSpacing, fr.spacing[:]) || fr.hasPS
			fr.thickness = numOr(m, tag.SliceThickness, fr.thickness)
			fr.between = numOr(m, tag.SpacingBetweenSlices, fr.between)
		}
		if m := macro(tag.MREchoSequence); m != nil {
			fr.te = numOr(m, tag.EffectiveEchoTime, fr.te)
		}
		if m := macro(tag.MRModifierSequence); m != nil {
			if ir := str(m, tag.InversionRecovery); ir != "NO" {
				fr.ti = numOr(m, tag.InversionTimes, fr.ti)
			}
		}
		if m := macro(tag.MRTimingAndRelatedParametersSequence); m != nil {
			fr.tr = numOr(m, tag.RepetitionTime, fr.tr)
			fr.fa = numOr(m, tag.FlipAngle, fr.fa)
		}
		if m := macro(tag.PixelValueTransformationSequence); m != nil {
			if bad := badRescale(m); bad != "" {
				return nil, formatErr(rf.path, fmt.Sprintf("frame %d: %s", k+1, bad), nil)
			}
			fr.slope = numOr(m, tag.RescaleSlope, fr.slope)
			fr.intercept = numOr(m, tag.RescaleIntercept, fr.intercept)
		}
		if m := macro(tag.RealWorldValueMappingSequence); m != nil {
			fr.rwvSlope, fr.rwvIntercept, fr.rwvUnits, fr.rwvNote = rwvOf(m)
		}
		if m := macro(tag.MRImageFrameTypeSequence); m != nil {
			ft := strings.Join(strs(m, tag.FrameType), `\`)
			if c := str(m, tag.ComplexImageComponent); c != "" {
				ft += "/" + c
			}
			if ft != "" {
				fr.kind = ft
			}
		}
		fi.frames[k] = fr
	}
	return fi, nil
}

// dateTime returns the acquisition date-time in DT form from
// AcquisitionDateTime, or AcquisitionDate + AcquisitionTime, else the
// series or study date and time, with TimezoneOffsetFromUTC appended when
// the value has no offset of its own.
func dateTime(top []*lib.Element) string {
	dt := str(top, tag.AcquisitionDateTime)
	if dt == "" {
		for _, p := range [][2]tag.Tag{
			{tag.AcquisitionDate, tag.AcquisitionTime},
			{tag.SeriesDate, tag.SeriesTime},
			{tag.ContentDate, tag.ContentTime},
			{tag.StudyDate, tag.StudyTime},
		} {
			if d := str(top, p[0]); d != "" {
				dt = d + str(top, p[1])
				break
			}
		}
	}
	if dt != "" && !strings.ContainsAny(dt, "+-") {
		dt += str(top, tag.TimezoneOffsetFromUTC)
	}
	return dt
}

// rfc3339 converts a DICOM DT value (PS3.5 Table 6.2-1) to RFC 3339 when
// it carries a UTC offset, else to the same form without offset; "" when
// the value is malformed.
func rfc3339(dt string) string {
	zone := ""
	if i := strings.IndexAny(dt, "+-"); i >= 0 {
		zone, dt = dt[i:], dt[:i]
		if len(zone) != 5 || !digits(zone[1:]) {
			return ""
		}
		zone = zone[:3] + ":" + zone[3:]
	}
	frac := ""
	if i := strings.IndexByte(dt, '.'); i >= 0 {
		frac, dt = dt[i:], dt[:i]
		if !digits(frac[1:]) {
			return ""
		}
	}
	if len(dt) < 8 || len(dt)%2 == 1 || !digits(dt) {
		return ""
	}
	if len(dt) < 14 {
		dt += "000000"[:14-len(dt)]
	}
	if len(dt) != 14 {
		return ""
	}
	return dt[0:4] + "-" + dt[4:6] + "-" + dt[6:8] + "T" + dt[8:10] + ":" + dt[10:12] + ":" + dt[12:14] + frac + zone
}

func digits(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] < '0' || s[i] > '9' {
			return false
		}
	}
	return len(s) > 0
}

// Element accessors. They never panic: a missing element, a wrong value
// type or an unparsable number gives "" / NaN / false.

func find(elems []*lib.Element, t tag.Tag) *lib.Element {
	for _, e := range elems {
		if e != nil && e.Tag == t {
			return e
		}
	}
	return nil
}

func itemsOf(e *lib.Element) [][]*lib.Element {
	if e == nil || e.Value == nil {
		return nil
	}
	seq, ok := e.Value.GetValue().([]*lib.SequenceItemValue)
	if !ok {
		return nil
	}
	out := make([][]*lib.Element, len(seq))
	for i, it := range seq {
		if it != nil {
			out[i], _ = it.GetValue().([]*lib.Element)
		}
	}
	return out
}

func firstItem(e *lib.Element) []*lib.Element {
	if it := itemsOf(e); len(it) > 0 {
		return it[0]
	}
	return nil
}

// valueOf returns the value of e; an element of VR UN with a defined
// length (bytes as they were encoded, little endian; PS3.5 §6.2.2) is
// decoded by the VR the data dictionary gives its tag.
func valueOf(e *lib.Element) any {
	v := e.Value.GetValue()
	b, ok := v.([]byte)
	if !ok || e.RawValueRepresentation != "UN" {
		return v
	}
	info, err := tag.Find(e.Tag)
	if err != nil || len(info.VRs) == 0 {
		return v
	}
	le := binary.LittleEndian
	switch vr := info.VRs[0]; vr {
	case "AE", "AS", "CS", "DA", "DS", "DT", "IS", "LO", "LT", "PN", "SH", "ST", "TM", "UC", "UI", "UR", "UT":
		return strings.Split(strings.TrimRight(string(b), " \x00"), `\`)
	case "US", "SS", "UL", "SL":
		size := 2
		if vr == "UL" || vr == "SL" {
			size = 4
		}
		out := make([]int, 0, len(b)/size)
		for i := 0; i+size <= len(b); i += size {
			switch vr {
			case "US":
				out = append(out, int(le.Uint16(b[i:])))
			case "SS":
				out = append(out, int(int16(le.Uint16(b[i:]))))
			case "UL":
				out = append(out, int(le.Uint32(b[i:])))
			default:
				out = append(out, int(int32(le.Uint32(b[i:]))))
			}
		}
		return out
	case "FL", "FD":
		size := 4
		if vr == "FD" {
			size = 8
		}
		out := make([]float64, 0, len(b)/size)
		for i := 0; i+size <= len(b); i += size {
			if size == 4 {
				out = append(out, float64(math.Float32frombits(le.Uint32(b[i:]))))
			} else {
				out = append(out, math.Float64frombits(le.Uint64(b[i:])))
			}
		}
		return out
	}
	return v
}

func strs(elems []*lib.Element, t tag.Tag) []string {
	e := find(elems, t)
	if e == nil || e.Value == nil {
		return nil
	}
	v, _ := valueOf(e).([]string)
	out := make([]string, 0, len(v))
	for _, s := range v {
		out = append(out, strings.Trim(s, " \x00"))
	}
	return out
}

func str(elems []*lib.Element, t tag.Tag) string {
	return strings.Join(strs(elems, t), `\`)
}

// nums returns the numeric values of an element of any numeric VR
// (DS/IS strings, FL/FD, US/SS/UL/SL).
func nums(elems []*lib.Element, t tag.Tag) []float64 {
	e := find(elems, t)
	if e == nil || e.Value == nil {
		return nil
	}
	switch v := valueOf(e).(type) {
	case []string:
		out := make([]float64, 0, len(v))
		for _, s := range v {
			f, err := strconv.ParseFloat(strings.TrimSpace(strings.Trim(s, "\x00")), 64)
			if err != nil {
				return nil
			}
			out = append(out, f)
		}
		return out
	case []float64:
		return v
	case []int:
		out := make([]float64, len(v))
		for i, x := range v {
			out[i] = float64(x)
		}
		return out
	}
	return nil
}

func num(elems []*lib.Element, t tag.Tag) float64 { return numOr(elems, t, math.NaN()) }

func numOr(elems []*lib.Element, t tag.Tag, def float64) float64 {
	if v := nums(elems, t); len(v) > 0 && !math.IsNaN(v[0]) && !math.IsInf(v[0], 0) {
		return v[0]
	}
	return def
}

// badRescale describes a RescaleSlope or RescaleIntercept that is present
// but cannot scale pixel values: a slope of 0 (every value would become the
// intercept), a value that is not a finite number, or text that is not a
// decimal string. Absent or empty values are not an error: PS3.3 C.11.1.1.2
// makes the identity the meaning of no Modality LUT. Treating a present but
// invalid slope as 1 would give numbers with no evidence behind them.
func badRescale(elems []*lib.Element) string {
	for _, t := range []tag.Tag{tag.RescaleSlope, tag.RescaleIntercept} {
		name := "RescaleSlope (0028,1053)"
		if t == tag.RescaleIntercept {
			name = "RescaleIntercept (0028,1052)"
		}
		e := find(elems, t)
		if e == nil || e.Value == nil {
			continue
		}
		raw := strings.TrimSpace(strings.Trim(str(elems, t), "\x00"))
		if raw == "" {
			if _, isText := e.Value.GetValue().([]string); isText {
				continue
			}
		}
		v := nums(elems, t)
		switch {
		case len(v) == 0:
			return fmt.Sprintf("%s %q is not a finite number", name, raw)
		case math.IsNaN(v[0]) || math.IsInf(v[0], 0):
			return fmt.Sprintf("%s is %v: pixel values cannot be scaled", name, v[0])
		case t == tag.RescaleSlope && v[0] == 0:
			return name + " is 0: every pixel would take the intercept's value"
		}
	}
	return ""
}

func integer(elems []*lib.Element, t tag.Tag) (int, bool) {
	v := nums(elems, t)
	if len(v) == 0 || v[0] != math.Trunc(v[0]) || math.Abs(v[0]) > 1<<31 {
		return 0, false
	}
	return int(v[0]), true
}

func vec(elems []*lib.Element, t tag.Tag, dst []float64) bool {
	v := nums(elems, t)
	if len(v) < len(dst) {
		return false
	}
	for i := range dst {
		if math.IsNaN(v[i]) || math.IsInf(v[i], 0) {
			return false
		}
		dst[i] = v[i]
	}
	return true
}

// decimals returns the number of decimal places the decimal strings of
// an element are written with (the most over its values; "1.5e-1"
// counts as 2). A DS value "12.3" stands for anything in [12.25, 12.35]
// (PS3.5 Table 6.2-1 DS). Binary values (FD) and absent elements give -1.
func decimals(elems []*lib.Element, t tag.Tag) int {
	e := find(elems, t)
	if e == nil || e.Value == nil {
		return -1
	}
	v, ok := e.Value.GetValue().([]string)
	if !ok {
		return -1
	}
	most := -1
	for _, s := range v {
		s = strings.ToLower(strings.TrimSpace(strings.Trim(s, "\x00")))
		exp := 0
		if i := strings.IndexByte(s, 'e'); i >= 0 {
			n, err := strconv.Atoi(strings.TrimPrefix(s[i+1:], "+"))
			if err != nil || n < -30 || n > 30 {
				continue
			}
			exp, s = n, s[:i]
		}
		dec := 0
		if i := strings.IndexByte(s, '.'); i >= 0 {
			dec = len(s) - i - 1
		}
		most = max(most, dec-exp)
	}
	return most
}

// mosaicOf tells whether the image is a mosaic: several slices tiled in
// one frame. Signs: MOSAIC in ImageType (common practice of one vendor's
// exports), or a frame at least twice the AcquisitionMatrix (0018,1310)
// in both directions together with a slice count in the vendor's private
// NumberOfImagesInMosaic (0019,100A) (from that vendor's DICOM
// conformance statement).
func mosaicOf(top []*lib.Element, fi *fileInfo) string {
	tagged := false
	for _, v := range fi.imageType {
		if v == "MOSAIC" {
			tagged = true
		}
	}
	var acq int
	for _, v := range nums(top, tag.AcquisitionMatrix) {
		acq = max(acq, int(v))
	}
	count := 0
	if e := find(top, tag.Tag{Group: 0x0019, Element: 0x100A}); e != nil && e.Value != nil {
		switch v := e.Value.GetValue().(type) {
		case []int:
			if len(v) > 0 {
				count = v[0]
			}
		case []byte:
			if len(v) >= 2 {
				count = int(v[0]) | int(v[1])<<8
			}
		}
	}
	big := acq > 0 && fi.rows >= 2*acq && fi.cols >= 2*acq
	switch {
	case tagged && count > 0:
		return fmt.Sprintf("ImageType MOSAIC, %d slices tiled in one %d×%d frame", count, fi.cols, fi.rows)
	case tagged:
		return fmt.Sprintf("ImageType MOSAIC, a %d×%d frame of tiled slices", fi.cols, fi.rows)
	case big && count > 1:
		return fmt.Sprintf("a %d×%d frame for an acquisition matrix of %d with %d slices in NumberOfImagesInMosaic (0019,100A)", fi.cols, fi.rows, acq, count)
	}
	return ""
}

// rwvOf reads the first Real World Value Mapping item (PS3.3
// C.7.6.16.2.11): RealWorldValueSlope (0040,9225) and
// RealWorldValueIntercept (0040,9224), the units from
// MeasurementUnitsCodeSequence (0040,08EA) CodeValue. A mapping by LUT
// only is not applied (note says so). NaN slope: none.
func rwvOf(it []*lib.Element) (slope, icpt float64, units, note string) {
	slope, icpt = math.NaN(), math.NaN()
	if it == nil {
		return
	}
	if u := firstItem(find(it, tag.MeasurementUnitsCodeSequence)); u != nil {
		units = str(u, tag.CodeValue)
	}
	slope = num(it, tag.RealWorldValueSlope)
	icpt = numOr(it, tag.RealWorldValueIntercept, 0)
	switch {
	case math.IsNaN(slope) && find(it, tag.RealWorldValueLUTData) != nil:
		note = "Real World Value Mapping by LUT is not applied; RescaleSlope/RescaleIntercept used"
	case math.IsNaN(slope):
		note = "Real World Value Mapping without a slope is not applied"
	case slope == 0:
		slope, note = math.NaN(), "Real World Value Mapping with slope 0 is not applied"
	}
	return
}

// privateScale returns the vendor's private floating-point scale slope
// (2005,100E), NaN when absent: FL in explicit VR files, 4 bytes little
// endian in implicit VR ones.
func privateScale(top []*lib.Element) float64 {
	e := find(top, tag.Tag{Group: 0x2005, Element: 0x100E})
	if e == nil || e.Value == nil {
		return math.NaN()
	}
	switch v := e.Value.GetValue().(type) {
	case []float64:
		if len(v) > 0 {
			return v[0]
		}
	case []byte:
		if len(v) == 4 {
			return float64(math.Float32frombits(binary.LittleEndian.Uint32(v)))
		}
	}
	return math.NaN()
}
