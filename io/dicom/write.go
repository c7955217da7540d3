package dicom

import (
	"crypto/rand"
	"encoding/binary"
	"encoding/hex"

	"github.com/tauvox/tauvox/internal/output"

	"fmt"
	"io"
	"math"
	"math/big"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/tauvox/tauvox/volume"
)

// implementationUID identifies tauvox as the writer in the file meta
// information (PS3.7 D.3.3.2). It is a UUID-derived UID under the 2.25
// root (PS3.5 §B.2) made once for this project.
const implementationUID = "2.25.219737463851470282604327862513849712001"

// WriteOptions are the settings of WriteSeries. The zero value (and nil)
// writes classic single-frame files with the defaults listed per field.
type WriteOptions struct {
	// Enhanced writes one Enhanced MR Image Storage file with functional
	// groups instead of one MR Image Storage file per slice and volume.
	Enhanced bool
	// Description is the SeriesDescription. Defaults to
	// im.Source.Description, else "tauvox synthetic series".
	Description string
	// SeriesNumber defaults to 1 if 0.
	SeriesNumber int
	// Sequence is the ScanningSequence: "SE", "GR" or "IR". Defaults to
	// "IR" when any volume has an inversion time, else "SE".
	Sequence string
	// Manufacturer defaults to "tauvox"; StationName to im.Source.Scanner,
	// else "TAUVOX-SIM"; Model (ManufacturerModelName) to "simulator".
	Manufacturer, StationName, Model string
	// FieldStrength in tesla; defaults to im.Source.FieldStrength when
	// positive, else the attribute is left empty.
	FieldStrength float64
	// PhantomName is written as PatientName and PatientID; defaults to
	// "PHANTOM^TAUVOX". No other patient attribute gets a value.
	PhantomName string
	// AcquiredAt sets the study, series and acquisition date and time.
	// Defaults to im.Source.AcquiredAt (RFC 3339), else the current time.
	AcquiredAt time.Time
	// StudyUID and FrameOfReferenceUID join the series to an existing
	// study; each defaults to a new UID.
	StudyUID, FrameOfReferenceUID string
	// Rand is the source of the UIDs and file names. Defaults to
	// crypto/rand.
	Rand io.Reader
}

// WriteSeries writes im into the folder dir (created if needed) as a DICOM
// MR series in explicit VR little endian: by default one MR Image Storage
// file per slice and volume with random-looking 16-hex-digit names, or with
// opt.Enhanced one Enhanced MR Image Storage file. Samples are stored as
// uint16 (int16 when any sample is negative) with RescaleSlope chosen per
// image (per frame) so that the largest magnitude uses the full range,
// RescaleIntercept 0: the quantisation error is at most half a slope, that
// is max|v|/131070 (uint16) or max|v|/65534 (int16) of that image.
//
// The geometry comes from the affine, converted RAS → LPS: X·Δi, Y·Δj and
// the slice step d are its first three columns times diag(−1,−1,1), the
// first voxel's position its fourth; ImageOrientationPatient = X, Y;
// PixelSpacing = Δj\Δi; SliceThickness = SpacingBetweenSlices = |d|. The
// reader returns slices in ascending order along X × Y, so an image whose
// slice axis points against X × Y comes back with k reversed (the same
// voxels at the same world positions). EchoTime, InversionTime,
// RepetitionTime and FlipAngle come from im.Acq (unknown values are left
// empty). UIDs are new "2.25." UUID-derived UIDs (PS3.5 §B.2).
//
// It returns an error for an invalid image, non-finite samples, an affine
// whose columns are not perpendicular (DICOM cannot express shear), or a
// failed write; files already written by the call are then removed.
func WriteSeries(dir string, im *volume.Image, opt *WriteOptions) error {
	if err := im.Validate(); err != nil {
		return fmt.Errorf("%s: dicom: %w", output.Line(dir), err)
	}
	var o WriteOptions
	if opt != nil {
		o = *opt
	}
	w, err := newSeriesWriter(dir, im, &o)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return &fileError{dir, "create folder", err}
	}
	if o.Enhanced {
		err = w.writeEnhanced()
	} else {
		err = w.writeClassic()
	}
	if err != nil {
		for _, p := range w.written {
			os.Remove(p)
		}
	}
	return err
}

type seriesWriter struct {
	dir     string
	im      *volume.Image
	o       *WriteOptions
	rnd     io.Reader
	study   string
	series  string
	frame   string
	when    time.Time
	zone    bool
	signed  bool
	lpsGeom       // LPS directions, spacings, slice step, origin
	echo    []int // echo number per volume
	written []string
}

func newSeriesWriter(dir string, im *volume.Image, o *WriteOptions) (*seriesWriter, error) {
	w := &seriesWriter{dir: dir, im: im, o: o, rnd: o.Rand}
	if w.rnd == nil {
		w.rnd = rand.Reader
	}
	fail := func(format string, a ...any) error {
		return fmt.Errorf("%s: dicom: %s", output.Line(dir), fmt.Sprintf(format, a...))
	}
	if im.Dims[0] > 0xFFFF || im.Dims[1] > 0xFFFF {
		return nil, fail("matrix %d×%d does not fit Rows/Columns (US)", im.Dims[0], im.Dims[1])
	}
	if o.Enhanced && int64(im.Dims[2])*int64(im.Dims[3]) > maxFramesPerFile {
		return nil, fail("%d frames are more than an enhanced file may hold here (%d)", im.Dims[2]*im.Dims[3], maxFramesPerFile)
	}
	if o.Enhanced && 2*int64(im.Dims[0])*int64(im.Dims[1])*int64(im.Dims[2])*int64(im.Dims[3]) > math.MaxUint32-1 {
		return nil, fail("pixel data larger than 4 GiB cannot be stored in one file")
	}
	// RAS → LPS: negate the first two rows (check-values §3.4).
	g, err := lpsGeometry(im.Affine)
	if err != nil {
		return nil, fail("%v", err)
	}
	w.lpsGeom = *g
	for _, v := range im.Data {
		if math.IsNaN(float64(v)) || math.IsInf(float64(v), 0) {
			return nil, fail("sample %v cannot be stored as an integer", v)
		}
		if v < 0 {
			w.signed = true
		}
	}
	if w.study = o.StudyUID; w.study == "" {
		if w.study, err = w.uid(); err != nil {
			return nil, err
		}
	}
	if w.frame = o.FrameOfReferenceUID; w.frame == "" {
		if w.frame, err = w.uid(); err != nil {
			return nil, err
		}
	}
	if w.series, err = w.uid(); err != nil {
		return nil, err
	}
	w.when = o.AcquiredAt
	if w.when.IsZero() {
		if t, err := time.Parse(time.RFC3339Nano, im.Source.AcquiredAt); err == nil {
			w.when, w.zone = t, true
		} else if t, err := time.ParseInLocation("2006-01-02T15:04:05", im.Source.AcquiredAt, time.Local); err == nil {
			w.when = t
		} else {
			w.when, w.zone = time.Now(), true
		}
	} else {
		w.zone = true
	}
	// Echo numbers: rank of each volume's echo time (1-based).
	nt := im.Dims[3]
	w.echo = make([]int, nt)
	for t := range w.echo {
		w.echo[t] = 1
		te := w.acq(t).EchoTime
		seen := map[float64]bool{}
		for u := 0; u < nt; u++ {
			if v := w.acq(u).EchoTime; v < te && !seen[v] {
				seen[v] = true
				w.echo[t]++
			}
		}
	}
	return w, nil
}

func (w *seriesWriter) acq(t int) volume.Acquisition {
	if w.im.Acq == nil {
		return volume.Unknown()
	}
	return w.im.Acq[t]
}

// uid returns a new UUID-derived UID "2.25.<decimal>" (PS3.5 §B.2) from
// a random (version 4) UUID.
func (w *seriesWriter) uid() (string, error) {
	var b [16]byte
	if _, err := io.ReadFull(w.rnd, b[:]); err != nil {
		return "", fmt.Errorf("%s: dicom: random source: %w", output.Line(w.dir), err)
	}
	b[6] = b[6]&0x0F | 0x40 // version 4
	b[8] = b[8]&0x3F | 0x80 // RFC 4122 variant
	return "2.25." + new(big.Int).SetBytes(b[:]).String(), nil
}

func (w *seriesWriter) name() (string, error) {
	var b [8]byte
	if _, err := io.ReadFull(w.rnd, b[:]); err != nil {
		return "", fmt.Errorf("%s: dicom: random source: %w", output.Line(w.dir), err)
	}
	return hex.EncodeToString(b[:]), nil
}

func (w *seriesWriter) sequence() string {
	if s := strings.ToUpper(w.o.Sequence); s != "" {
		return s
	}
	for t := 0; t < w.im.Dims[3]; t++ {
		if ti := w.acq(t).InversionTime; !math.IsNaN(ti) {
			return "IR"
		}
	}
	return "SE"
}

func orDefault(s, def string) string {
	if s == "" {
		return def
	}
	return s
}

// common puts the attributes shared by classic and enhanced files.
func (w *seriesWriter) common(d *dataset, sopClass, sopInstance string) {
	o, src := w.o, w.im.Source
	date, tm := w.when.Format("20060102"), w.when.Format("150405.000000")
	d.str(0x00080005, "CS", "ISO_IR 192")
	d.str(0x00080012, "DA", date)
	d.str(0x00080013, "TM", tm)
	d.str(0x00080016, "UI", sopClass)
	d.str(0x00080018, "UI", sopInstance)
	d.str(0x00080020, "DA", date)
	d.str(0x00080021, "DA", date)
	d.str(0x00080023, "DA", date)
	d.str(0x00080030, "TM", tm)
	d.str(0x00080031, "TM", tm)
	d.str(0x00080033, "TM", tm)
	d.str(0x00080050, "SH")
	d.str(0x00080060, "CS", "MR")
	d.str(0x00080070, "LO", clip(orDefault(o.Manufacturer, "tauvox"), 64))
	d.str(0x00080090, "PN")
	if w.zone {
		d.str(0x00080201, "SH", w.when.Format("-0700"))
	}
	d.str(0x00081010, "SH", clip(orDefault(o.StationName, orDefault(src.Scanner, "TAUVOX-SIM")), 16))
	d.str(0x0008103E, "LO", clip(orDefault(o.Description, orDefault(src.Description, "tauvox synthetic series")), 64))
	d.str(0x00081090, "LO", clip(orDefault(o.Model, "simulator"), 64))
	phantom := clip(orDefault(o.PhantomName, "PHANTOM^TAUVOX"), 64)
	d.str(0x00100010, "PN", phantom)
	d.str(0x00100020, "LO", strings.ReplaceAll(phantom, "^", "-"))
	d.str(0x00100030, "DA")
	d.str(0x00100040, "CS")
	field := o.FieldStrength
	if !(field > 0) {
		field = src.FieldStrength
	}
	if field > 0 {
		d.ds(0x00180087, field)
	} else {
		d.str(0x00180087, "DS")
	}
	d.str(0x00185100, "CS", "HFS")
	d.str(0x0020000D, "UI", w.study)
	d.str(0x0020000E, "UI", w.series)
	d.str(0x00200010, "SH", "1")
	num := o.SeriesNumber
	if num == 0 {
		num = 1
	}
	d.is(0x00200011, num)
	d.str(0x00200052, "UI", w.frame)
	d.str(0x00201040, "LO")
	d.us(0x00280002, 1)
	d.str(0x00280004, "CS", "MONOCHROME2")
	d.us(0x00280010, uint16(w.im.Dims[1]))
	d.us(0x00280011, uint16(w.im.Dims[0]))
	d.us(0x00280100, 16)
	d.us(0x00280101, 16)
	d.us(0x00280102, 15)
	rep := uint16(0)
	if w.signed {
		rep = 1
	}
	d.us(0x00280103, rep)
}

func clip(s string, n int) string {
	s = strings.Map(func(r rune) rune {
		if r < 0x20 || r == 0x7f || r == '\\' {
			return ' '
		}
		return r
	}, s)
	for len(s) > n {
		r := []rune(s)
		s = string(r[:len(r)-1])
	}
	return s
}

// quantise stores src into dst (little endian 16-bit) and returns the
// slope used; the slope is the value of its own DS text, so that a reader
// applying the written slope gets the quantised values exactly.
func (w *seriesWriter) quantise(dst []byte, src []float32) float64 {
	top := 65535.0
	if w.signed {
		top = 32767
	}
	var m float64
	for _, v := range src {
		m = math.Max(m, math.Abs(float64(v)))
	}
	slope := 1.0
	if m > 0 {
		slope = parseDS(formatDS(m / top * (1 + 1e-12)))
	}
	for i, v := range src {
		q := math.Round(float64(v) / slope)
		q = math.Max(math.Min(q, top), -top)
		if w.signed {
			binary.LittleEndian.PutUint16(dst[2*i:], uint16(int16(q)))
		} else {
			binary.LittleEndian.PutUint16(dst[2*i:], uint16(q))
		}
	}
	return slope
}

// file writes one Part-10 file: preamble, "DICM", file meta information
// (PS3.10 §7.1) and the data set.
func (w *seriesWriter) file(sopClass, sopInstance string, body *dataset) error {
	name, err := w.name()
	if err != nil {
		return err
	}
	var meta dataset
	meta.put(0x00020001, "OB", []byte{0, 1})
	meta.str(0x00020002, "UI", sopClass)
	meta.str(0x00020003, "UI", sopInstance)
	meta.str(0x00020010, "UI", tsExplicitLE)
	meta.str(0x00020012, "UI", implementationUID)
	meta.str(0x00020013, "SH", "TAUVOX")
	mb := meta.bytes()
	var group dataset
	group.ul(0x00020000, uint32(len(mb)))
	out := make([]byte, 128, 128+4+12+len(mb))
	out = append(out, "DICM"...)
	out = append(out, group.bytes()...)
	out = append(out, mb...)
	out = append(out, body.bytes()...)

	path := filepath.Join(w.dir, name)
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
	if err != nil {
		return &fileError{path, "create", err}
	}
	w.written = append(w.written, path)
	_, err = f.Write(out)
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return &fileError{path, "write", err}
	}
	return nil
}

const (
	sopClassicMR = sopMR
)

func (w *seriesWriter) writeClassic() error {
	im := w.im
	nx, ny, nz, nt := im.Dims[0], im.Dims[1], im.Dims[2], im.Dims[3]
	plane := nx * ny
	pix := make([]byte, 2*plane)
	seq := w.sequence()
	iop := []float64{w.x[0], w.x[1], w.x[2], w.y[0], w.y[1], w.y[2]}
	step := w.step
	for t := 0; t < nt; t++ {
		a := w.acq(t)
		for k := 0; k < nz; k++ {
			sop, err := w.uid()
			if err != nil {
				return err
			}
			off := (k + nz*t) * plane
			slope := w.quantise(pix, im.Data[off:off+plane])
			var d dataset
			w.common(&d, sopClassicMR, sop)
			d.str(0x00080008, "CS", "ORIGINAL", "PRIMARY", "M", "ND")
			d.str(0x00080022, "DA", w.when.Format("20060102"))
			d.str(0x00080032, "TM", w.when.Format("150405.000000"))
			d.str(0x00180020, "CS", seq)
			d.str(0x00180021, "CS", "NONE")
			d.str(0x00180022, "CS")
			d.str(0x00180023, "CS", "2D")
			d.ds(0x00180050, step)
			d.ds(0x00180080, a.RepetitionTime)
			d.ds(0x00180081, a.EchoTime)
			if !math.IsNaN(a.InversionTime) {
				d.ds(0x00180082, a.InversionTime)
			}
			d.is(0x00180086, w.echo[t])
			d.ds(0x00180088, step)
			if !math.IsNaN(a.FlipAngle) {
				d.ds(0x00181314, a.FlipAngle)
			}
			d.is(0x00200012, t+1)
			d.is(0x00200013, 1+k+nz*t)
			d.ds(0x00200032, w.position(k)...)
			d.ds(0x00200037, iop...)
			d.ds(0x00280030, w.dj, w.di)
			d.ds(0x00281052, 0)
			d.ds(0x00281053, slope)
			d.str(0x00281054, "LO", "US")
			d.put(0x7FE00010, "OW", pix)
			if err := w.file(sopClassicMR, sop, &d); err != nil {
				return err
			}
		}
	}
	return nil
}

// writeEnhanced writes one Enhanced MR Image Storage file (PS3.3 A.36.2)
// with the functional groups of check-values §3.1: shared Pixel Measures
// and Plane Orientation; per frame Frame Content, Plane Position, MR Echo,
// MR Modifier, MR Timing and Related Parameters, Pixel Value
// Transformation and MR Image Frame Type. Frames are stored with k fastest.
func (w *seriesWriter) writeEnhanced() error {
	im := w.im
	nx, ny, nz, nt := im.Dims[0], im.Dims[1], im.Dims[2], im.Dims[3]
	plane := nx * ny
	pix := make([]byte, 2*plane*nz*nt)
	sop, err := w.uid()
	if err != nil {
		return err
	}
	step := w.step
	seq := w.sequence()
	var d dataset
	w.common(&d, sopEnhancedMR, sop)
	d.str(0x00080008, "CS", "ORIGINAL", "PRIMARY", "M", "NONE")
	d.str(0x0008002A, "DT", w.when.Format("20060102150405.000000"))
	d.str(0x00089205, "CS", "MONOCHROME")
	d.str(0x00089206, "CS", "VOLUME")
	d.str(0x00089207, "CS", "NONE")
	d.str(0x00089208, "CS", "MAGNITUDE")
	d.str(0x00089209, "CS", "UNKNOWN")
	pulse := "SPIN"
	if seq == "GR" {
		pulse = "GRADIENT"
	}
	d.str(0x00189008, "CS", pulse)
	d.is(0x00200013, 1)
	d.is(0x00280008, nz*nt)
	d.str(0x00282110, "CS", "00")

	var pm, po dataset
	pm.ds(0x00280030, w.dj, w.di)
	pm.ds(0x00180050, step)
	pm.ds(0x00180088, step)
	po.ds(0x00200037, w.x[0], w.x[1], w.x[2], w.y[0], w.y[1], w.y[2])
	var shared dataset
	shared.seq(0x00289110, &pm)
	shared.seq(0x00209116, &po)
	d.seq(0x52009229, &shared)

	per := make([]*dataset, 0, nz*nt)
	for t := 0; t < nt; t++ {
		a := w.acq(t)
		for k := 0; k < nz; k++ {
			f := k + nz*t
			slope := w.quantise(pix[2*plane*f:2*plane*(f+1)], im.Data[f*plane:(f+1)*plane])
			var fc, pp, me, mm, tm, pv, ft dataset
			fc.ul(0x00209157, uint32(k+1), uint32(t+1))
			fc.str(0x00209056, "SH", "1")
			fc.ul(0x00209057, uint32(k+1))
			fc.us(0x00209156, uint16(t+1))
			pp.ds(0x00200032, w.position(k)...)
			if !math.IsNaN(a.EchoTime) {
				me.fd(0x00189082, a.EchoTime)
			}
			if math.IsNaN(a.InversionTime) {
				mm.str(0x00189009, "CS", "NO")
			} else {
				mm.str(0x00189009, "CS", "YES")
				mm.fd(0x00189079, a.InversionTime)
			}
			tm.ds(0x00180080, a.RepetitionTime)
			tm.ds(0x00181314, a.FlipAngle)
			pv.ds(0x00281052, 0)
			pv.ds(0x00281053, slope)
			pv.str(0x00281054, "LO", "US")
			ft.str(0x00089007, "CS", "ORIGINAL", "PRIMARY", "M", "NONE")
			ft.str(0x00089208, "CS", "MAGNITUDE")
			g := &dataset{}
			g.seq(0x00209111, &fc)
			g.seq(0x00209113, &pp)
			g.seq(0x00189114, &me)
			g.seq(0x00189115, &mm)
			g.seq(0x00189112, &tm)
			g.seq(0x00289145, &pv)
			g.seq(0x00189226, &ft)
			per = append(per, g)
		}
	}
	d.seq(0x52009230, per...)
	// DimensionIndexSequence: InStackPositionNumber, then the volume
	// index (FrameAcquisitionNumber), both in the Frame Content macro.
	var di1, di2 dataset
	di1.at(0x00209165, 0x00209057)
	di1.at(0x00209167, 0x00209111)
	di2.at(0x00209165, 0x00209156)
	di2.at(0x00209167, 0x00209111)
	d.seq(0x00209222, &di1, &di2)
	d.put(0x7FE00010, "OW", pix)
	return w.file(sopEnhancedMR, sop, &d)
}
